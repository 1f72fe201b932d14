"""A step entry is never stuck and never silent, in real Chromium: a station that answers 500
or never answers keeps the entry on the tablet, which sends it again (once) as soon as the
station answers; "Send now"; and two tablets on one job, one late, both told."""

from __future__ import annotations

import time

import pytest
from playwright.sync_api import expect

from .conftest import log_in, open_removal_to_warning, serving, tap, wait_until
from .test_offline import OUTBOX_EMPTY, _job_and_event, _stored
from .test_tablet_grade import VIEWPORTS

ENTRY_TIMEOUT_S = 2  # the station's setting for these tests (8 s by default on the tablet)
EVENTS = "**/jobs/*/events"
HEALTH = "**/healthz"


@pytest.fixture
def station(db_path, station_clock):
    """The real station on a free port, with a short step-entry timeout for the tablets."""
    with serving(db_path, station_clock, ENTRY_TIMEOUT_S=ENTRY_TIMEOUT_S) as port:
        yield f"http://127.0.0.1:{port}"


def _tablet(browser):
    # No worker: the page alone keeps and sends its outbox, and page.route sees every request.
    context = browser.new_context(viewport=VIEWPORTS["tablet-portrait"], has_touch=True,
                                  service_workers="block")
    return context, context.new_page()


def test_a_step_entry_answered_500_is_kept_and_arrives_once(browser, station, db_path):
    context, page = _tablet(browser)
    open_removal_to_warning(page, station)
    job_id, event_id = _job_and_event(page)
    page.route(EVENTS, lambda route: route.fulfill(status=500, body="Internal Server Error"))

    tap(page, "[data-testid=acknowledge]")
    expect(page.get_by_test_id("outbox-count")).to_have_text(
        "1 entry waiting to reach the station")
    saved = page.get_by_test_id("outbox-saved")
    expect(saved).to_contain_text("The station had a problem — this entry waits on the tablet.")
    expect(saved).to_contain_text("It answered 500")
    expect(page.get_by_test_id("outbox-trouble")).to_contain_text("tried again")
    expect(page.get_by_test_id("outbox-send-now")).to_be_visible()
    # Kept, so the tablet goes on from its copy of the job (static/js/tablet_job.js).
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-kind", "lockout")
    expect(page.get_by_test_id("tablet-copy")).to_contain_text("not yet at the station")
    assert "{" not in saved.inner_text()
    assert _stored(db_path, job_id, event_id) == []
    page.wait_for_timeout(1500)  # tried again behind its back-off, still 500: still kept
    assert len(page.evaluate("window.sparkwardOutbox.entries()")) == 1

    page.unroute(EVENTS)  # the station is well again: sent by the back-off (1, 2, 4, 8 s)
    wait_until(page, OUTBOX_EMPTY, timeout_s=20)
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "breakers")
    expect(page.get_by_test_id("outbox-send-now")).to_be_hidden()
    assert len(_stored(db_path, job_id, event_id)) == 1
    assert page.evaluate("window.sparkwardOutbox.refusals()") == []
    context.close()


def test_a_step_entry_that_times_out_is_kept_and_arrives_once(browser, station, db_path):
    context, page = _tablet(browser)
    open_removal_to_warning(page, station)
    assert page.evaluate("window.sparkwardOutbox.entryTimeoutMs()") == ENTRY_TIMEOUT_S * 1000
    job_id, event_id = _job_and_event(page)

    def reaches_station_answer_never_comes(route) -> None:
        route.fetch()  # the station stores it (or has it already); the tablet hears nothing

    page.route(EVENTS, reaches_station_answer_never_comes)
    started = time.monotonic()
    page.click("[data-testid=acknowledge]")
    count = page.get_by_test_id("outbox-count")
    expect(count).to_have_text("1 entry waiting to reach the station", timeout=10_000)
    waited = time.monotonic() - started
    assert ENTRY_TIMEOUT_S - 0.5 <= waited < ENTRY_TIMEOUT_S + 3, waited
    # Kept exactly like an entry made without network: the same words.
    expect(page.get_by_test_id("outbox-saved")).to_contain_text(
        "Saved on this tablet — not yet at the station.")
    expect(page.get_by_test_id("tablet-copy")).to_contain_text("not yet at the station")
    assert len(_stored(db_path, job_id, event_id)) == 1  # it did reach the station

    page.wait_for_timeout(ENTRY_TIMEOUT_S * 1000 + 500)  # a resend that hangs again: kept
    assert len(page.evaluate("window.sparkwardOutbox.entries()")) == 1
    page.unroute(EVENTS)
    wait_until(page, OUTBOX_EMPTY, timeout_s=ENTRY_TIMEOUT_S + 5)
    expect(count).to_be_hidden()
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "breakers")
    assert len(_stored(db_path, job_id, event_id)) == 1  # the resend was the same entry
    assert page.evaluate("window.sparkwardOutbox.refusals()") == []
    context.close()


def test_send_now_and_a_station_back_each_send_within_2_s(browser, station, db_path):
    context, page = _tablet(browser)
    open_removal_to_warning(page, station)
    job_id, first_id = _job_and_event(page)
    unreachable = lambda route: route.abort("internetdisconnected")  # noqa: E731
    page.route(EVENTS, unreachable)
    page.route(HEALTH, unreachable)
    tap(page, "[data-testid=acknowledge]")
    send_now = page.get_by_test_id("outbox-send-now")
    expect(send_now).to_be_visible()
    expect(page.get_by_test_id("outbox-notice")).to_contain_text(
        "No answer from the station yet.")
    page.wait_for_timeout(1500)
    assert _stored(db_path, job_id, first_id) == []

    # The probe still gets no answer, so only the button can send it.
    page.unroute(EVENTS)
    started = time.monotonic()
    send_now.click()
    wait_until(page, OUTBOX_EMPTY, timeout_s=2)
    assert time.monotonic() - started < 2
    assert len(_stored(db_path, job_id, first_id)) == 1
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "breakers")
    expect(send_now).to_be_hidden()

    # Gone again for a while (the tablet keeps asking), then back: sent with no click. The
    # station comes back just after a probe went unanswered, the worst moment.
    probes: list[float] = []

    def unanswered_probe(route) -> None:
        probes.append(time.monotonic())
        route.abort("internetdisconnected")

    page.unroute(HEALTH)
    page.route(HEALTH, unanswered_probe)
    page.route(EVENTS, unreachable)
    page.fill("[data-testid=tag-number-IGN-A]", "T-1")
    tag_id = page.input_value("form:has([data-testid=tag-IGN-A]) [name=event_id]")
    tap(page, "[data-testid=tag-IGN-A]")
    expect(send_now).to_be_visible()
    page.wait_for_timeout(4000)
    asked = len(probes)
    assert asked >= 2  # it keeps asking
    deadline = time.monotonic() + 20
    while len(probes) == asked and time.monotonic() < deadline:
        page.wait_for_timeout(10)
    page.unroute(EVENTS)
    page.unroute(HEALTH)
    started = time.monotonic()
    wait_until(page, OUTBOX_EMPTY, timeout_s=2)
    assert time.monotonic() - started < 2
    assert len(_stored(db_path, job_id, tag_id)) == 1
    expect(page.get_by_test_id("tagged-IGN-A")).to_be_visible()
    context.close()


def test_two_tablets_one_late_the_refusal_names_tag_and_breaker_and_the_other_is_told(
        browser, station, db_path):
    first, aino = _tablet(browser)
    open_removal_to_warning(aino, station)
    tap(aino, "[data-testid=acknowledge]")
    expect(aino.get_by_test_id("step")).to_have_attribute("data-step-kind", "lockout")
    job_url = aino.url
    second, tomas = _tablet(browser)
    log_in(tomas, station, "mech2", "demo-mech2")
    tomas.goto(job_url)
    expect(tomas.get_by_test_id("step")).to_have_attribute("data-step-kind", "lockout")

    first.set_offline(True)  # (no worker on these tablets: this covers every request)
    aino.fill("[data-testid=tag-number-IGN-A]", "T-7")
    tap(aino, "[data-testid=tag-IGN-A]")
    expect(aino.get_by_test_id("outbox-count")).to_have_text(
        "1 entry waiting to reach the station")

    tomas.fill("[data-testid=tag-number-IGN-A]", "T-8")
    tap(tomas, "[data-testid=tag-IGN-A]")
    expect(tomas.get_by_test_id("tagged-IGN-A")).to_contain_text("T-8")

    first.set_offline(False)
    refused = aino.get_by_test_id("refused-entry")
    expect(refused).to_be_visible()
    expect(refused).to_contain_text("Step 4 of")        # the step
    expect(refused).to_contain_text("tag T-7 on IGN-A")  # the entry
    reason = aino.get_by_test_id("refused-reason")
    expect(reason).to_contain_text("Your tag T-7 on IGN-A is not recorded: Tomas Reyes "
                                   "recorded tag T-8 on IGN-A for this job at ")
    expect(reason).to_contain_text("Take your tag T-7 off IGN-A")
    assert "{" not in reason.inner_text()
    wait_until(aino, OUTBOX_EMPTY)

    # Tomas's page tells him the next time it talks to the station (his next entry).
    told = tomas.get_by_test_id("refused-after-you")
    expect(told).to_have_count(0)
    tomas.fill("[data-testid=tag-number-IGN-B]", "T-9")
    tap(tomas, "[data-testid=tag-IGN-B]")
    expect(told).to_contain_text("An entry from Aino Varga's tablet for the lockout of IGN-A "
                                 "(tag T-7 on IGN-A) was refused because you had recorded "
                                 "it first.")
    expect(told).to_contain_text("Check with Aino Varga.")
    tomas.reload()
    expect(told).to_be_visible()  # until he dismisses it
    tap(tomas, "[data-testid=notice-read]")
    expect(told).to_have_count(0)
    tomas.reload()
    expect(told).to_have_count(0)
    expect(aino.get_by_test_id("refused-after-you")).to_have_count(0)
    first.close()
    second.close()
