"""The tablet carries the job in real Chromium: offline, the mechanic works an exciter removal
from the lockout to the performer's signature (the WARNINGs, the lockout with its tags, the
discharge wait, the isolation reading, the lead steps with their grounding, the removed
exciter against the fitted serial, the tool count); a reload keeps that work, what the station
would refuse is refused on the tablet in its words, and a step that needs the station says
so; back online every entry arrives once, in order, and the station agrees."""

from __future__ import annotations

import json
import re

import pytest
from playwright.sync_api import expect

from webapp import store
from webapp.store import engines
from webapp.store import jobs as job_store

from .conftest import open_removal_to_warning, stored_events, tap, wait_until
from .test_offline import OUTBOX_EMPTY, PAGE_SAVED, WORKER_IN_CHARGE, Network
from .test_tablet_grade import VIEWPORTS, _audit

STEPS_KEPT = "async () => !!(await window.sparkwardTabletJob.steps({job}))"
OUTBOX_SIZE = "async () => (await window.sparkwardOutbox.entries()).length"


def _engine_now(db_path, job_id: int):
    """The exciter the station has fitted at the job's position (demo data) and the engine's
    last usage totals, if any (a removal records them; the same figures follow the last
    entry; invented figures where the engine has none yet)."""
    db = store.connect(db_path)
    try:
        engine = engines.current(db, job_store.job(db, job_id)["engine_id"])
        return engine.fitted("exciter", "A"), engine.usage
    finally:
        db.close()


@pytest.mark.browser
def test_offline_the_tablet_works_on_to_the_signature_and_the_station_gets_it_all_once(
        browser, live_server, db_path, station_clock):
    # The worker keeps the job page, the job's steps are on the tablet, and the tablet's
    # clock runs as real time until the test moves it on (Playwright's clock).
    context, network, page, job_id = _tablet_in_charge(browser, live_server, station_clock)
    before = len(stored_events(db_path, job_id))
    fitted, usage = _engine_now(db_path, job_id)  # the demo engine's exciter, its totals
    step = page.get_by_test_id("step")

    network.cut()
    tap(page, "[data-testid=acknowledge]")
    # The next step appears from the tablet's copy, marked as such.
    expect(step).to_have_attribute("data-step-id", "breakers")
    expect(page.get_by_test_id("tablet-copy")).to_contain_text(
        "1 entry is kept on this tablet, not yet at the station")
    expect(page.get_by_test_id("progress-kept-lethal-energy-breakers")).to_be_visible()
    _audit(page, "lockout from the tablet's copy")

    page.fill("[data-testid=tag-number-IGN-A]", "T-7")
    tap(page, "[data-testid=tag-IGN-A]")
    expect(page.get_by_test_id("tagged-IGN-A")).to_contain_text("Tagged T-7")
    # The same tag number on the other breaker: the station's rule, applied on the tablet.
    page.fill("[data-testid=tag-number-IGN-B]", "T-7")
    page.click("[data-testid=tag-IGN-B]")
    expect(page.get_by_test_id("tablet-refusal")).to_have_text(
        "✗ Tag T-7 already hangs on breaker IGN-A; each tag has its own number. Check the "
        "number on the tag you hung on IGN-B.")
    assert page.evaluate(OUTBOX_SIZE) == 2  # the refused tag was not kept
    expect(page.get_by_test_id("done")).to_have_text("Tag every breaker first (IGN-B)")

    page.reload()  # still offline: the worker's old copy, brought up to date by the tablet
    expect(step).to_have_attribute("data-step-id", "breakers")
    expect(page.get_by_test_id("tagged-IGN-A")).to_contain_text("Tagged T-7")
    page.fill("[data-testid=tag-number-IGN-B]", "T-8")
    tap(page, "[data-testid=tag-IGN-B]")
    expect(page.get_by_test_id("done")).to_have_text(
        "Lockout confirmed: every breaker open and tagged")
    tap(page, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "input-first")
    tap(page, "[data-testid=continue]")
    expect(step).to_have_attribute("data-step-id", "disconnect-input")
    tap(page, "[data-testid=done]")  # the input is off: the tablet counts the wait from here
    # The discharge wait, counted by the tablet's clock: the data's 2 min and the 30 s the
    # station asks of a wait only a tablet witnessed (domain/placement.py).
    expect(step).to_have_attribute("data-step-kind", "discharge_wait")
    countdown = page.get_by_test_id("countdown")
    expect(countdown).to_have_text(re.compile(r"2:(30|29)"))
    done = page.get_by_test_id("done")
    expect(done).to_be_disabled()
    page.clock.fast_forward("01:00")
    expect(countdown).to_have_text(re.compile(r"1:(30|29)"))

    page.reload()  # the count goes on from the disconnection: a reload does not restart it
    expect(countdown).to_have_text(re.compile(r"1:(30|29|28)"))
    expect(done).to_be_disabled()
    page.clock.fast_forward("01:31")
    station_clock.advance(151)  # the station's clock keeps the tablet's time (both real)
    expect(countdown).to_have_text("0:00")
    tap(page, "[data-testid=done]")
    # The isolation check is a reading: judged on the tablet against the carried limits,
    # with the register's voltmeter, in the station's words.
    expect(step).to_have_attribute("data-step-id", "verify-isolation")
    expect(page.get_by_test_id("limits")).to_have_text("Limits: at most 0.5 V")
    page.select_option("[data-testid=instrument-pick]", "VM-004")
    page.fill("[data-testid=reading-value]", "0,02x")
    page.click("[data-testid=record-reading]")
    expect(page.get_by_test_id("tablet-refusal")).to_have_text("✗ '0,02x' is not a number.")
    page.fill("[data-testid=reading-value]", "0.02")
    expect(page.get_by_test_id("tablet-verdict")).to_have_text("✓ within")
    _audit(page, "isolation reading from the tablet's copy")
    tap(page, "[data-testid=record-reading]")
    expect(step).to_have_attribute("data-step-id", "disconnect-leads")
    tap(page, "[data-testid=done]")  # the terminal becomes reachable: no grounding yet
    expect(step).to_have_attribute("data-step-id", "ground-lead")
    tap(page, "[data-testid=acknowledge]")
    tap(page, "[data-testid=acknowledge]")  # cap the connectors (CAUTION)
    expect(step).to_have_attribute("data-step-id", "ground-terminals")
    tap(page, "[data-testid=done]")  # grounded: the tablet's clock starts the window
    expect(step).to_have_attribute("data-step-id", "sealed-unit")
    tap(page, "[data-testid=acknowledge]")
    expect(step).to_have_attribute("data-step-id", "remove-unit")
    expect(page.get_by_test_id("grounded-at")).to_contain_text("Lead last grounded")
    tap(page, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "removed-exciter")
    expect(page.get_by_test_id("fitted-serial")).to_have_text(fitted.serial)
    _audit(page, "removed part from the tablet's copy")
    page.fill("[data-testid=part-number]", fitted.part_number)
    page.fill("[data-testid=part-serial]", fitted.serial)
    page.check("[data-testid=status-unserviceable]")
    page.check("[data-testid=reason-failed]")
    page.fill("[data-testid=part-tag]", "U-4471")
    page.fill("[data-testid=part-engine-hours]", "-5")
    page.fill("[data-testid=part-starts]", str(usage.starts if usage else 950))
    page.click("[data-testid=record-part]")  # hours below zero: the station's words, here
    expect(page.get_by_test_id("tablet-refusal")).to_have_text(
        "✗ Enter the engine's engine hours (a number from its log).")
    page.fill("[data-testid=part-engine-hours]", f"{usage.engine_hours if usage else 1200:g}")
    tap(page, "[data-testid=record-part]")
    expect(step).to_have_attribute("data-step-id", "tool-count")
    for index in range(3):
        page.check(f"[data-testid=item-{index}]")
    tap(page, "[data-testid=done]")
    # The performer's signature needs the station: the PIN never stays on the tablet.
    expect(step).to_have_attribute("data-step-id", "performer")
    expect(page.get_by_test_id("needs-station")).to_contain_text("This step needs the station.")
    expect(page.get_by_test_id("needs-station")).to_contain_text("A signature needs the station")
    expect(page.locator("[data-testid=step] form")).to_have_count(0)
    assert page.evaluate(OUTBOX_SIZE) == 16
    assert len(stored_events(db_path, job_id)) == before  # nothing reached the station yet

    page.close()  # the app closed and opened again, still offline
    page = context.new_page()
    page.goto(f"{live_server}/jobs/{job_id}")
    step = page.get_by_test_id("step")
    expect(step).to_have_attribute("data-step-id", "performer")
    expect(page.get_by_test_id("progress-kept-breakers")).to_be_visible()
    expect(page.get_by_test_id("progress-kept-removed-exciter")).to_be_visible()

    network.restore()
    # The entries go; the page then reloads from the station (it was the worker's copy).
    expect(page.get_by_test_id("outbox-count")).to_be_hidden(timeout=30_000)
    wait_until(page, OUTBOX_EMPTY)
    expect(step).to_have_attribute("data-step-id", "performer", timeout=30_000)
    expect(page.get_by_test_id("tablet-copy")).to_have_count(0)  # the station's own screen
    events = stored_events(db_path, job_id)[before:]
    assert [(e["kind"], e["step_id"]) for e in events] == [
        ("acknowledged", "lethal-energy-breakers"),
        ("breaker_tagged", "breakers"), ("breaker_tagged", "breakers"),
        ("step_done", "breakers"), ("step_done", "input-first"),
        ("step_done", "disconnect-input"), ("step_done", "discharge"),
        ("reading_recorded", "verify-isolation"), ("step_done", "disconnect-leads"),
        ("acknowledged", "ground-lead"), ("acknowledged", "cap-connectors"),
        ("step_done", "ground-terminals"), ("acknowledged", "sealed-unit"),
        ("step_done", "remove-unit"), ("part_recorded", "removed-exciter"),
        ("step_done", "tool-count")]
    # The wait was placed by the tablet's count: the station's copy of it says so.
    assert events[6]["device_sent"] is not None
    assert [e["data"].get("tag") for e in events if e["kind"] == "breaker_tagged"] == [
        "T-7", "T-8"]
    reading = events[7]["data"]
    assert reading["verdict"] == "within" and reading["isolation"] == "verified"
    assert reading["instrument"]["id"] == "VM-004"
    assert events[14]["data"]["verdict"] == "matches"
    assert len({e["id"] for e in events}) == len(events)
    # The station's word equals the tablet's: the performer's signature is next.
    carried = page.get_by_test_id("job").get_attribute("data-job-carry")
    assert json.loads(carried)["next"] == "performer"
    context.close()


def _seconds(text: str) -> int:
    minutes, seconds = text.split(":")
    return int(minutes) * 60 + int(seconds)


@pytest.mark.browser
def test_a_countdown_on_the_kept_copy_goes_on_from_when_the_page_was_kept(
        browser, live_server):
    context = browser.new_context(viewport=VIEWPORTS["tablet-landscape"])
    network = Network(context)
    page = context.new_page()
    open_removal_to_warning(page, live_server)
    tap(page, "[data-testid=acknowledge]")
    for breaker, tag in (("IGN-A", "T-21"), ("IGN-B", "T-22")):
        page.fill(f"[data-testid=tag-number-{breaker}]", tag)
        tap(page, f"[data-testid=tag-{breaker}]")
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=continue]")
    tap(page, "[data-testid=done]")  # the input is off: the station's wait starts
    page.wait_for_function(WORKER_IN_CHARGE, polling=50)
    page.reload()  # the worker keeps this copy; the station's clock stands still
    wait_until(page, PAGE_SAVED)
    countdown = page.get_by_test_id("countdown")
    expect(countdown).to_have_text("2:00")

    page.wait_for_timeout(4000)
    network.cut()
    page.reload()  # the kept copy, 4 s later
    expect(page.get_by_test_id("outbox-notice")).to_contain_text("saved on this tablet")
    page.wait_for_timeout(300)  # a tick of the page's clock
    assert _seconds(countdown.inner_text()) <= 117  # not 2:00 again
    context.close()


@pytest.mark.browser
def test_offline_a_lapsed_grounding_is_refused_and_grounding_again_is_kept_on_the_tablet(
        browser, live_server, db_path, station_clock):
    context, network, page, job_id = _tablet_in_charge(browser, live_server, station_clock)
    step = page.get_by_test_id("step")
    _online_to_the_isolation_check(page, station_clock)
    page.select_option("[data-testid=instrument-pick]", "VM-004")
    page.fill("[data-testid=reading-value]", "0.01")
    tap(page, "[data-testid=record-reading]")
    expect(step).to_have_attribute("data-step-id", "disconnect-leads")
    before = len(stored_events(db_path, job_id))

    network.cut()
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=acknowledge]")
    tap(page, "[data-testid=acknowledge]")
    expect(step).to_have_attribute("data-step-id", "ground-terminals")
    tap(page, "[data-testid=done]")  # grounded, by the tablet's clock
    tap(page, "[data-testid=acknowledge]")
    expect(step).to_have_attribute("data-step-id", "remove-unit")
    expect(page.get_by_test_id("grounded-at")).to_contain_text("Lead last grounded")
    # A pause longer than the window: a break, a part fetched from stores.
    page.clock.fast_forward("16:00")
    station_clock.advance(16 * 60)
    page.click("[data-testid=done]")
    refusal = page.get_by_test_id("tablet-refusal")
    expect(refusal).to_contain_text(re.compile(
        r"✗ The lead was last grounded at \d\d:\d\d station time, 16:0\d ago; the lead and "
        r"the exciter are handled within 15 min of grounding\. Ground the lead's terminal and "
        r"the exciter output again with the insulated probe, record it \('Lead grounded "
        r"again'\), then do this step\."))
    kept = page.evaluate(OUTBOX_SIZE)
    assert kept == 5  # the refused step was not kept
    tap(page, "[data-testid=lead-grounded]")  # the station's own entry, kept here
    expect(page.get_by_test_id("grounding-due")).to_have_count(0)
    expect(page.get_by_test_id("grounded-at")).to_contain_text("0:0")
    tap(page, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "removed-exciter")
    assert page.evaluate(OUTBOX_SIZE) == kept + 2

    network.restore()
    expect(page.get_by_test_id("outbox-count")).to_be_hidden(timeout=30_000)
    wait_until(page, OUTBOX_EMPTY)
    expect(step).to_have_attribute("data-step-id", "removed-exciter", timeout=30_000)
    events = stored_events(db_path, job_id)[before:]
    assert [(e["kind"], e["step_id"]) for e in events] == [
        ("step_done", "disconnect-leads"), ("acknowledged", "ground-lead"),
        ("acknowledged", "cap-connectors"), ("step_done", "ground-terminals"),
        ("acknowledged", "sealed-unit"), ("lead_grounded", None),
        ("step_done", "remove-unit")]
    context.close()


def _online_to_the_isolation_check(page, station_clock) -> None:
    """At the station, online: the lockout, the disconnection and the wait, to the isolation
    check (the station's own screens)."""
    tap(page, "[data-testid=acknowledge]")
    for breaker, tag in (("IGN-A", "T-31"), ("IGN-B", "T-32")):
        page.fill(f"[data-testid=tag-number-{breaker}]", tag)
        tap(page, f"[data-testid=tag-{breaker}]")
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=continue]")
    tap(page, "[data-testid=done]")
    station_clock.advance(125)
    page.clock.fast_forward("02:05")
    page.reload()
    tap(page, "[data-testid=done]")
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "verify-isolation")


def _tablet_in_charge(browser, live_server, station_clock):
    """A tablet with the worker in charge and the removal's steps kept, its clock installed."""
    context = browser.new_context(viewport=VIEWPORTS["tablet-landscape"], has_touch=True)
    network = Network(context)
    context.clock.install(time=station_clock())
    page = context.new_page()
    open_removal_to_warning(page, live_server)
    page.wait_for_function(WORKER_IN_CHARGE, polling=50)
    page.reload()
    wait_until(page, PAGE_SAVED)
    job_id = int(page.get_by_test_id("job").get_attribute("data-job-id"))
    wait_until(page, STEPS_KEPT.format(job=job_id))
    return context, network, page, job_id


@pytest.mark.browser
def test_offline_voltage_present_stops_the_work_and_the_finding_waits_for_the_station(
        browser, live_server, db_path, station_clock):
    context, network, page, job_id = _tablet_in_charge(browser, live_server, station_clock)
    _online_to_the_isolation_check(page, station_clock)
    step = page.get_by_test_id("step")
    network.cut()
    page.reload()  # the worker's copy: the tablet's own reading form
    page.select_option("[data-testid=instrument-pick]", "VM-004")
    page.fill("[data-testid=reading-value]", "2")
    page.select_option("[data-testid=input-unit]", "kV")
    page.click("[data-testid=record-reading]")  # past the voltmeter's 600 V: refused here
    expect(page.get_by_test_id("tablet-refusal")).to_have_text(
        "✗ 2 kV is outside the range of Voltmeter VM-004 (0–600 V): take the reading "
        "with a voltmeter whose range covers it.")
    page.select_option("[data-testid=input-unit]", "V")
    page.fill("[data-testid=reading-value]", "27.6")
    expect(page.get_by_test_id("tablet-verdict")).to_have_text("✗ out of limits")
    tap(page, "[data-testid=record-reading]")
    # The step waits: stop, touch nothing; the finding is recorded once the station has it.
    expect(step).to_have_attribute("data-step-id", "verify-isolation")
    stop = page.get_by_test_id("finding-needed")
    expect(stop).to_contain_text("STOP: voltage present.")
    expect(stop).to_contain_text("Touch nothing on the ignition system")
    expect(page.get_by_test_id("finding-waits")).to_contain_text(
        "recorded when the station has this reading")
    expect(page.locator("[data-testid=step] form")).to_have_count(0)
    assert page.evaluate(OUTBOX_SIZE) == 1

    network.restore()
    expect(page.get_by_test_id("outbox-count")).to_be_hidden(timeout=30_000)
    wait_until(page, OUTBOX_EMPTY)
    # The station's own screen asks for the finding on the reading it now has.
    expect(page.get_by_test_id("record-finding")).to_be_visible(timeout=30_000)
    reading = stored_events(db_path, job_id)[-1]
    assert reading["kind"] == "reading_recorded"
    assert reading["data"]["verdict"] == "out of limits"
    context.close()
