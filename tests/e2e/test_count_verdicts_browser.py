"""Spark count verdicts in real Chromium: a combined count at one unit's rate is out of
limits and asks for a finding; a "replaced" finding asks for the re-test count."""

from __future__ import annotations

from playwright.sync_api import expect

from tests.conftest import DEMO_PASSWORDS
from tests.web.jobs import Job

from .conftest import log_in, tap
from .test_tablet_grade import _audit


def test_a_combined_count_at_one_unit_s_rate_needs_a_finding_and_a_re_test(
        browser, live_server, station_api, station_clock):
    # A functional check on DEMO-101 engine 1 walked to its combined count: A and B each
    # counted 36 in 30 s (72/min, the demo walk's counts, invented).
    check = Job(station_api("mech1"), station_api.db, station_clock,
                "ignition-functional-check", channel=None)
    check.walk_to("count-both")
    context = browser.new_context(viewport={"width": 1024, "height": 768}, has_touch=True)
    page = context.new_page()
    page.clock.install()   # the tablet's own clock moves with the station's below
    log_in(page, live_server, "mech1", DEMO_PASSWORDS["mech1"])
    page.goto(f"{live_server}/jobs/{check.id}")
    step = page.get_by_test_id("step")
    expect(step).to_have_attribute("data-step-id", "count-both")
    tap(page, "[data-testid=start-count]")
    station_clock.advance(30)                      # the 30 s window, on the station's clock
    page.clock.fast_forward(30_000)                # and on the tablet's
    page.fill("[data-testid=count]", "36")         # heard as one unit: 72/min with both on
    page.fill("[data-testid=supply-voltage-timed]", "27.5")   # 22-29 V DC (from memory)
    tap(page, "[data-testid=use-count]")
    expect(page.get_by_test_id("finding-needed")).to_be_visible()
    attempts = page.get_by_test_id("attempts")
    expect(attempts).to_contain_text("out of limits")
    expect(attempts).to_contain_text("one unit not firing")
    _audit(page, "a combined count out of limits, finding asked for")

    page.fill("[data-testid=finding-text]", "Channel B exciter silent with both selected")
    page.check("[data-testid=disposition-replaced]")
    tap(page, "[data-testid=record-finding]")
    # Replaced: the step is not done; it asks for the re-test count.
    expect(step).to_have_attribute("data-step-id", "count-both")
    expect(page.get_by_test_id("count-not-started")).to_be_visible()
    expect(page.get_by_test_id("progress-count-both")).not_to_have_attribute("data-status",
                                                                             "done")
    tap(page, "[data-testid=start-count]")
    station_clock.advance(30)
    page.clock.fast_forward(30_000)
    page.fill("[data-testid=count]", "72")          # 144/min: A + B
    page.fill("[data-testid=supply-voltage-timed]", "27.5")
    tap(page, "[data-testid=use-count]")
    expect(step).not_to_have_attribute("data-step-id", "count-both")
    expect(page.get_by_test_id("progress-count-both")).to_have_attribute("data-status", "done")
    context.close()


def test_a_combination_unit_is_counted_in_both_of_its_modes(
        browser, live_server, station_api, station_clock):
    # DEMO-104 engine 1 carries an invented combination unit (XEX-5200-01): start mode
    # 55-95/min rated 12 J, continuous mode 40-80/min rated 2 J (demo values, invented).
    from webapp.store import fleet as fleet_store
    engine = next(e["id"] for a in fleet_store.fleet(station_api.db) for e in a["engines"]
                  if e["serial"] == "QT6-10237")
    check = Job(station_api("mech1"), station_api.db, station_clock,
                "ignition-functional-check", channel=None, engine=engine)
    check.walk_to("count-a-start")
    context = browser.new_context(viewport={"width": 1024, "height": 768}, has_touch=True)
    page = context.new_page()
    page.clock.install()
    log_in(page, live_server, "mech1", DEMO_PASSWORDS["mech1"])
    page.goto(f"{live_server}/jobs/{check.id}")
    step = page.get_by_test_id("step")
    for step_id, mode, limits in (("count-a-start", "start", "55 to 95"),
                                  ("count-a-continuous", "continuous", "40 to 80")):
        expect(step).to_have_attribute("data-step-id", step_id)
        expect(page.get_by_test_id("count-mode")).to_contain_text(
            "high-energy start" if mode == "start" else "low-energy continuous")
        expect(page.get_by_test_id("limits")).to_contain_text(limits)
        expect(page.get_by_test_id("limits-from")).to_contain_text("from the procedure")
        tap(page, "[data-testid=start-count]")
        station_clock.advance(30)
        page.clock.fast_forward(30_000)
        page.fill("[data-testid=count]", "36")          # 72/min: within both modes' limits
        page.fill("[data-testid=supply-voltage-timed]", "27.5")   # demo's 22-29 V (invented)
        if mode == "continuous":
            # Sent in the other mode first: refused at the mode, nothing kept.
            page.check("[data-testid=mode-start-timed]")
            tap(page, "[data-testid=use-count]")
            expect(page.get_by_test_id("field-error-mode")).to_contain_text(
                "low-energy continuous")
            expect(step).to_have_attribute("data-step-id", step_id)
            page.fill("[data-testid=count]", "36")
            page.fill("[data-testid=supply-voltage-timed]", "27.5")
        page.check(f"[data-testid=mode-{mode}-timed]")
        tap(page, "[data-testid=use-count]")
        expect(page.get_by_test_id(f"progress-{step_id}")).to_have_attribute(
            "data-status", "done")
    _audit(page, "a combination unit counted in both modes")
    context.close()
