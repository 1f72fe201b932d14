"""Torque on the tablet's copy of a job, in real Chromium: offline, each fastener of the
installation's mounting bolts is torqued and kept on the tablet, a wrench the register has
as overdue is refused in the station's words, the step is done when every bolt stands; back
online the station takes every reading once, in order, and agrees."""

from __future__ import annotations

import pytest
from playwright.sync_api import expect

from tests.conftest import DEMO_PASSWORDS
from tests.web.jobs import Job, exciter_removed

from .conftest import log_in, stored_events, tap, wait_until
from .test_offline import OUTBOX_EMPTY, PAGE_SAVED, WORKER_IN_CHARGE, Network
from .test_tablet_grade import VIEWPORTS, _audit

STEPS_KEPT = "async () => !!(await window.sparkwardTabletJob.steps({job}))"
OUTBOX_SIZE = "async () => (await window.sparkwardOutbox.entries()).length"
# The demo bracket's four bolts, 35-40 lbf·in (tasks/exciter-installation.yaml, invented).
BOLTS = ["Bolt 1, upper forward", "Bolt 2, lower aft", "Bolt 3, upper aft",
         "Bolt 4, lower forward"]


@pytest.mark.browser
def test_offline_each_bolt_is_torqued_on_the_tablet_and_the_station_agrees(
        browser, live_server, db_path, station_api, station_clock):
    mech = station_api("mech1")
    exciter_removed(mech, station_api.db, station_clock)
    installation = Job(mech, station_api.db, station_clock, "exciter-installation")
    installation.walk_to("mounting-torque")
    context = browser.new_context(viewport=VIEWPORTS["tablet-landscape"], has_touch=True)
    network = Network(context)
    context.clock.install(time=station_clock())
    page = context.new_page()
    log_in(page, live_server, "mech1", DEMO_PASSWORDS["mech1"])
    page.goto(f"{live_server}/jobs/{installation.id}")
    page.wait_for_function(WORKER_IN_CHARGE, polling=50)
    page.reload()
    wait_until(page, PAGE_SAVED)
    wait_until(page, STEPS_KEPT.format(job=installation.id))
    step = page.get_by_test_id("step")
    expect(step).to_have_attribute("data-step-id", "mounting-torque")
    before = len(stored_events(db_path, installation.id))

    network.cut()
    page.reload()  # the worker's copy of the station's screen: its form is kept as well
    page.select_option("[data-testid=input-fastener]", BOLTS[0])
    page.fill("[data-testid=reading-value]", "37")
    page.select_option("[data-testid=instrument-pick]", "TW-017")
    tap(page, "[data-testid=record-reading]")
    # From here the tablet's copy: the bolts still to torque, the same fields.
    expect(page.get_by_test_id("tablet-copy")).to_be_visible()
    expect(page.locator("[data-testid=input-fastener] option")).to_have_count(3)
    _audit(page, "torque from the tablet's copy")
    page.fill("[data-testid=reading-value]", "38")
    page.fill("[data-testid=instrument-id]", "TW-009")
    page.click("[data-testid=record-reading]")
    expect(page.get_by_test_id("tablet-refusal")).to_have_text(
        "✗ Torque wrench TW-009 was due for calibration on 2026-11-15: use a torque wrench "
        "in calibration.")
    page.fill("[data-testid=instrument-id]", "")
    for kept, bolt in enumerate(BOLTS[1:], start=2):
        page.select_option("[data-testid=input-fastener]", bolt)
        page.fill("[data-testid=reading-value]", "38")
        page.select_option("[data-testid=instrument-pick]", "TW-017")
        tap(page, "[data-testid=record-reading]")
        wait_until(page, f"async () => (await window.sparkwardOutbox.entries()).length "
                         f"=== {kept}")
    expect(step).to_have_attribute("data-step-id", "bonding-resistance")
    assert page.evaluate(OUTBOX_SIZE) == 4

    network.restore()
    expect(page.get_by_test_id("outbox-count")).to_be_hidden(timeout=30_000)
    wait_until(page, OUTBOX_EMPTY)
    expect(step).to_have_attribute("data-step-id", "bonding-resistance", timeout=30_000)
    events = stored_events(db_path, installation.id)[before:]
    assert [(e["kind"], e["data"]["fastener"], e["data"]["verdict"]) for e in events] == [
        ("reading_recorded", bolt, "within") for bolt in BOLTS]
    # The page then shows the station's own state, not only the tablet's view of it (the
    # swap that brings it may come a moment after the outbox empties).
    wait_until(page, "() => { const job = document.getElementById('job'); "
                     "return !!(job && job.dataset.jobCarry) && "
                     "JSON.parse(job.dataset.jobCarry).next === 'bonding-resistance'; }")
    context.close()
