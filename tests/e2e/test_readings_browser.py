"""Readings in real Chromium: tap-counting a channel, a torque in lbf·in shown in N·m for
each named bolt, and the adapter's wrench setting at an angle as the station computes it."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

from playwright.sync_api import expect

from tests.web.jobs import Job, exciter_removed
from webapp.domain import torque

from .conftest import fill_part, log_in, tap
from .test_tablet_grade import _audit

ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts"


def _tick_all(page, count):
    for index in range(count):
        page.check(f"[data-testid=item-{index}]")


def test_tap_count_channel_a_gives_rate_and_verdict(browser, live_server, station_clock):
    context = browser.new_context(viewport={"width": 1024, "height": 768}, has_touch=True)
    page = context.new_page()
    start = datetime.now(UTC)
    page.clock.install(time=start)
    page.clock.pause_at(start + timedelta(seconds=1))
    log_in(page, live_server, "mech1", "demo-mech1")
    page.click("[data-testid=engine-QT6-10233]")   # DEMO-102: transistorised exciters
    page.click("[data-testid=open-ignition-functional-check-all]")
    step = page.get_by_test_id("step")
    tap(page, "[data-testid=done]")
    _tick_all(page, 3)
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=acknowledge]")
    tap(page, "[data-testid=done]")                 # no tags hang: all tags off
    for _ in range(3):
        tap(page, "[data-testid=acknowledge]")
    _tick_all(page, 8)
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=acknowledge]")
    tap(page, "[data-testid=energise]")
    tap(page, "[data-testid=continue]")
    expect(step).to_have_attribute("data-step-kind", "spark_count")
    _audit(page, "spark count, not started")
    tap(page, "[data-testid=start-count]")     # the station times the count from here
    expect(page.get_by_test_id("count-started")).to_be_visible()
    _audit(page, "spark count")

    # Twelve snaps 0.75 s apart (80 per minute), timed by the page's controlled clock.
    for index in range(12):
        if index:
            page.clock.run_for(750)
        page.get_by_test_id("tap").dispatch_event("pointerdown")
    expect(page.get_by_test_id("tap-count")).to_have_text("12")
    expect(page.get_by_test_id("tap-rate")).to_have_text("80")
    page.fill("[data-testid=supply-voltage-taps]", "27.5")   # inside 22-29 V DC (from memory)
    tap(page, "[data-testid=use-taps]")           # sent at once: refused, too soon
    expect(page.get_by_test_id("refusal")).to_contain_text("not over")
    station_clock.advance(9)                      # the 8.25 s of taps have passed
    for index in range(12):
        if index:
            page.clock.run_for(750)
        page.get_by_test_id("tap").dispatch_event("pointerdown")
    page.fill("[data-testid=supply-voltage-taps]", "27.5")
    tap(page, "[data-testid=use-taps]")
    expect(step).to_have_attribute("data-step-id", "cross-connection-a")
    done = page.get_by_test_id("progress-count-a")
    expect(done).to_contain_text("80 per minute")
    expect(done).to_contain_text("✓ within")
    page.screenshot(path=str(ARTIFACTS / "spark-count-done.png"), full_page=True)
    context.close()


def test_torque_in_lbf_in_shows_n_m(browser, live_server, station_api, station_clock):
    # The channel A exciter came off in a removal job (its tags T-1 and T-2 still hang).
    exciter_removed(station_api("mech1"), station_api.db, station_clock)
    context = browser.new_context(viewport={"width": 360, "height": 740}, has_touch=True)
    page = context.new_page()
    log_in(page, live_server, "mech2", "demo-mech2")
    page.click("[data-testid=engine-QT6-10231]")
    page.click("[data-testid=open-exciter-installation-A]")
    step = page.get_by_test_id("step")
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=acknowledge]")
    for breaker, tag in (("IGN-A", "T-1"), ("IGN-B", "T-2")):   # the tags found hanging
        page.fill(f"[data-testid=tag-number-{breaker}]", tag)
        tap(page, f"[data-testid=tag-{breaker}]")
    tap(page, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "verify-isolation")
    page.fill("[data-testid=reading-value]", "0.01")   # volts at the input pins: dead
    page.select_option("[data-testid=instrument-pick]", "VM-004")   # demo voltmeter
    tap(page, "[data-testid=record-reading]")
    tap(page, "[data-testid=acknowledge]")              # WARNING ground the new unit
    expect(step).to_have_attribute("data-step-id", "ground-new-unit")
    tap(page, "[data-testid=done]")
    fill_part(page, "XEX-1001-03", "XE-9911", removed=False, tag_or_release="REL-2026-0442")
    tap(page, "[data-testid=acknowledge]")
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-kind", "torque")
    _audit(page, "torque on a phone")

    # The wrench comes from the register: the usable torque wrenches are offered with their
    # due dates (demo register, invented); the overdue TW-009 is not, and typed (as a scanner
    # would) it is refused with its due date, nothing recorded.
    pick = page.get_by_test_id("instrument-pick")
    expect(pick.locator("option", has_text="TW-017")).to_contain_text(
        "calibration due 2027-06-30")
    expect(pick.locator("option", has_text="TW-009")).to_have_count(0)
    page.fill("[data-testid=reading-value]", "37")
    page.fill("[data-testid=instrument-id]", "TW-009")
    tap(page, "[data-testid=record-reading]")
    expect(page.get_by_test_id("refusal")).to_contain_text(
        "was due for calibration on 2026-11-15")
    expect(page.get_by_test_id("fastener-1")).to_contain_text("to torque")
    # A wrench whose range (100–600 lbf·in) does not cover 37 lbf·in is refused too.
    page.fill("[data-testid=reading-value]", "37")
    page.fill("[data-testid=instrument-id]", "TW-031")
    tap(page, "[data-testid=record-reading]")
    expect(page.get_by_test_id("refusal")).to_contain_text("outside the range of Torque "
                                                           "wrench TW-031")

    # Four bolts, each recorded and judged on its own; the list says which are done. The
    # first two with the wrench picked from the list, the others with its ID scanned.
    for number in range(1, 5):
        expect(page.get_by_test_id(f"fastener-{number}")).to_contain_text("to torque")
        expect(page.get_by_test_id("input-fastener")).to_have_value(
            page.get_by_test_id(f"fastener-{number}").inner_text().split(":")[0])
        page.fill("[data-testid=reading-value]", "37")
        # NIST SP 811 B.9: 37 lbf·in × 0.1129848 = 4.180 N·m
        expect(page.get_by_test_id("converted")).to_contain_text("4.18 N·m")
        if number <= 2:
            page.fill("[data-testid=instrument-id]", "")
            page.select_option("[data-testid=instrument-pick]", "TW-017")
        else:
            page.fill("[data-testid=instrument-id]", "TW-017")
        tap(page, "[data-testid=record-reading]")
        if number < 4:
            expect(page.get_by_test_id(f"fastener-{number}")).to_contain_text("✓ within")
    expect(step).to_have_attribute("data-step-id", "bonding-resistance")
    recorded = page.get_by_test_id("progress-mounting-torque")
    expect(recorded).to_contain_text("37 lbf·in")
    expect(recorded).to_contain_text("4.18 N·m")
    expect(recorded).to_contain_text("✓ within")

    # A senseless value is answered at the field, the typed text kept, nothing stored.
    page.fill("[data-testid=reading-value]", "lots")
    tap(page, "[data-testid=record-reading]")
    expect(page.get_by_test_id("field-error-value")).to_contain_text("not a number")
    expect(page.get_by_test_id("reading-value")).to_have_value("lots")
    context.close()


def test_fleet_wear_page_flags_the_fast_plug_with_its_chart(browser, live_server):
    context = browser.new_context(viewport={"width": 1024, "height": 768})
    page = context.new_page()
    log_in(page, live_server, "mech1", "demo-mech1")
    page.click("text=Fleet wear")
    attention = page.locator("[data-testid^=attention-XP-]").first
    # Demo data (invented): DEMO-101 engine 1 channel B wore 0.22 → 1.02 mm in 580 engine
    # hours.
    expect(attention).to_contain_text("DEMO-101")
    expect(attention).to_contain_text("replace now")
    chart = attention.locator("svg")
    expect(chart).to_be_visible()
    expect(chart.locator("title").first).not_to_be_empty()
    assert chart.locator("circle, path, rect").count() >= 4
    _audit(page, "fleet wear")
    page.screenshot(path=str(ARTIFACTS / "fleet-wear.png"), full_page=True)
    context.close()


def test_the_page_shows_the_wrench_setting_the_station_computes_at_each_angle(
        browser, live_server, station_api, station_clock):
    job = Job(station_api("mech1"), station_api.db, station_clock, "igniter-plug-replacement")
    job.walk_to("plug-torque")
    context = browser.new_context(viewport={"width": 1024, "height": 768}, has_touch=True)
    page = context.new_page()
    log_in(page, live_server, "mech1", "demo-mech1")
    page.goto(f"{live_server}/jobs/{job.id}")
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "plug-torque")
    page.fill("[data-testid=wrench-length]", "12")
    page.fill("[data-testid=extension]", "2")
    setting = page.get_by_test_id("adapter-setting")
    # One formula: what the page shows is the domain's wrench_setting, to 4 figures, for the
    # step's 275 lbf·in mid-limit target (250–300, demo data). By hand: 0° 3300/14 = 235.7;
    # 60° 3300/13 = 253.8; 90° 275; 120° 3300/11 = 300 (cos 60° = ½, cos 120° = −½).
    for angle, by_hand in (("0", "235.7"), ("60", "253.8"), ("90", "275"), ("120", "300")):
        page.fill("[data-testid=adapter-angle]", angle)
        expected = torque.wrench_setting(275.0, 12.0, 2.0, float(angle))
        assert f"{float(f'{expected:.4g}'):g}" == by_hand
        expect(setting).to_contain_text(f"Set the wrench to {by_hand} lbf·in")
    context.close()
