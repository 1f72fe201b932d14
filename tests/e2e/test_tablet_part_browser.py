"""A part taken off, on the tablet's copy of a job, in real Chromium: offline, a data plate
that differs from the serial the station has fitted is kept, the tablet says the station will
ask for a finding and the step waits; back online the station asks for it."""

from __future__ import annotations

import pytest
from playwright.sync_api import expect

from .conftest import stored_events, tap, wait_until
from .test_offline import OUTBOX_EMPTY
from .test_tablet_job_browser import (
    OUTBOX_SIZE,
    _engine_now,
    _online_to_the_isolation_check,
    _tablet_in_charge,
)


@pytest.mark.browser
def test_offline_a_plate_that_differs_is_kept_and_waits_for_the_stations_finding(
        browser, live_server, db_path, station_clock):
    context, network, page, job_id = _tablet_in_charge(browser, live_server, station_clock)
    fitted, _ = _engine_now(db_path, job_id)
    _online_to_the_isolation_check(page, station_clock)
    step = page.get_by_test_id("step")
    page.select_option("[data-testid=instrument-pick]", "VM-004")
    page.fill("[data-testid=reading-value]", "0.01")
    tap(page, "[data-testid=record-reading]")
    tap(page, "[data-testid=done]")          # the lead off the exciter
    tap(page, "[data-testid=acknowledge]")
    tap(page, "[data-testid=acknowledge]")
    tap(page, "[data-testid=done]")          # grounded
    tap(page, "[data-testid=acknowledge]")
    tap(page, "[data-testid=done]")          # the unit off its mounting
    expect(step).to_have_attribute("data-step-id", "removed-exciter")

    network.cut()
    page.fill("[data-testid=part-number]", fitted.part_number)
    page.fill("[data-testid=part-serial]", fitted.serial + "-X")  # the plate says otherwise
    page.check("[data-testid=status-unserviceable]")
    page.check("[data-testid=reason-failed]")
    page.fill("[data-testid=part-tag]", "U-4480")
    page.fill("[data-testid=part-engine-hours]", "1200")
    page.fill("[data-testid=part-starts]", "950")
    tap(page, "[data-testid=record-part]")
    # Kept, not done: the station asks for a finding once it has the entry.
    expect(page.get_by_test_id("tablet-copy")).to_be_visible()
    expect(step).to_have_attribute("data-step-id", "removed-exciter")
    expect(page.get_by_test_id("finding-needed")).to_contain_text(
        f"does not match the part the station had fitted here (S/N {fitted.serial})")
    expect(page.get_by_test_id("finding-waits")).to_contain_text("the step waits for the "
                                                                 "station and is not done")
    expect(page.locator("[data-testid=step] form")).to_have_count(1)  # "grounded again" only
    assert page.evaluate(OUTBOX_SIZE) == 1

    network.restore()
    expect(page.get_by_test_id("outbox-count")).to_be_hidden(timeout=30_000)
    wait_until(page, OUTBOX_EMPTY)
    expect(page.get_by_test_id("record-finding")).to_be_visible(timeout=30_000)
    expect(page.get_by_test_id("finding-needed")).to_contain_text("data plate does not match")
    part = stored_events(db_path, job_id)[-1]
    assert part["kind"] == "part_recorded" and part["data"]["verdict"] == "mismatch"
    context.close()
