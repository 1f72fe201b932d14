"""A session that ends while a tablet holds queued work, in real Chromium: the entry stays on
the tablet, the mechanic is asked to log in again, and it reaches the station afterwards."""

from __future__ import annotations

from playwright.sync_api import expect

from .conftest import open_removal_to_warning, tap, wait_until
from .test_offline import OUTBOX_EMPTY, Network, _job_and_event, _stored


def test_queued_work_survives_the_session_ending_and_is_sent_after_log_in(
        browser, live_server, db_path, station_clock):
    context = browser.new_context(service_workers="block")  # the page replays by itself
    network = Network(context)
    page = context.new_page()
    open_removal_to_warning(page, live_server)
    job_id, event_id = _job_and_event(page)
    count = page.get_by_test_id("outbox-count")

    network.cut()
    tap(page, "[data-testid=acknowledge]")
    expect(count).to_have_text("1 entry waiting to reach the station")

    station_clock.advance(12 * 3600 + 60)  # past the absolute limit: the session is over
    network.restore()
    notice = page.get_by_test_id("outbox-notice")
    expect(notice).to_contain_text("The station asks you to log in again.")
    expect(count).to_have_text("1 entry waiting to reach the station")  # kept, not refused
    expect(page.get_by_test_id("outbox-refused")).to_be_hidden()
    assert _stored(db_path, job_id, event_id) == []

    page.get_by_test_id("outbox-log-in").click()
    expect(page).to_have_url(f"{live_server}/login?next=%2Fjobs%2F{job_id}")
    page.fill("#username", "mech1")
    page.fill("#password", "demo-mech1")
    page.click("[data-testid=login]")
    page.wait_for_url(f"{live_server}/jobs/{job_id}")
    wait_until(page, OUTBOX_EMPTY)
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "breakers")
    stored = _stored(db_path, job_id, event_id)
    assert len(stored) == 1 and stored[0]["kind"] == "acknowledged"
    context.close()
