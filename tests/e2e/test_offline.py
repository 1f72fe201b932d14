"""The tablet through a Wi-Fi drop-out in real Chromium: entries wait on the tablet, reach the
station once and in order, and what the station refuses is shown, never dropped."""

from __future__ import annotations

import time
import uuid

import pytest
from playwright.sync_api import expect

from webapp import store
from webapp.store import jobs as job_store

from .conftest import open_removal_to_warning, tap, wait_until
from .test_tablet_grade import VIEWPORTS, _audit

# Async predicates: polled with `wait_until` (page.evaluate awaits them), never given to
# page.wait_for_function (whose truthy promise would end the wait at once).
# (Between a reload and the new page's deferred scripts there is no outbox yet: not empty.)
OUTBOX_EMPTY = ("async () => !!window.sparkwardOutbox && "
                "(await window.sparkwardOutbox.entries()).length === 0")
PAGE_SAVED = ("async () => !!(await caches.match(location.href))")
WORKER_IN_CHARGE = ("() => navigator.serviceWorker.controller !== null && "
                    "navigator.serviceWorker.controller.state === 'activated'")


class Network:
    """The tablet's network, cut and restored. `set_offline` does not reach the service
    worker's own requests (a known Playwright limitation, its issue 2311), so those are
    aborted too."""

    def __init__(self, context) -> None:
        self.context = context
        self.offline = False
        context.route("**/*", self._route)

    def _route(self, route) -> None:
        if self.offline and route.request.service_worker is not None:
            route.abort("internetdisconnected")
        else:
            route.fallback()

    def cut(self) -> None:
        self.offline = True
        self.context.set_offline(True)

    def restore(self) -> None:
        self.offline = False
        self.context.set_offline(False)


def _stored(db_path, job_id: int, event_id: str) -> list[dict]:
    db = store.connect(db_path)
    try:
        return [e for e in job_store.events(db, job_id) if e["id"] == event_id]
    finally:
        db.close()


def _job_and_event(page) -> tuple[int, str]:
    job_id = int(page.get_by_test_id("job").get_attribute("data-job-id"))
    return job_id, page.input_value("[data-testid=step] form [name=event_id]")


def _removal_on_a_tablet(browser, live_server, viewport: str):
    """A touch tablet whose network the test cuts, at the removal's WARNING step."""
    context = browser.new_context(viewport=VIEWPORTS[viewport], has_touch=True)
    network = Network(context)
    page = context.new_page()
    open_removal_to_warning(page, live_server)
    return context, network, page


def test_a_step_done_offline_waits_on_the_tablet_then_reaches_the_station_once(
        browser, live_server, db_path):
    context, network, page = _removal_on_a_tablet(browser, live_server, "tablet-landscape")
    page.wait_for_function(WORKER_IN_CHARGE, polling=50)
    page.reload()  # now through the worker, which keeps a copy of the job page
    wait_until(page, PAGE_SAVED)
    job_id, event_id = _job_and_event(page)
    count = page.get_by_test_id("outbox-count")
    step = page.get_by_test_id("step")

    network.cut()
    tap(page, "[data-testid=acknowledge]")
    expect(count).to_have_text("1 entry waiting to reach the station")
    saved = page.get_by_test_id("outbox-saved")
    expect(saved).to_contain_text("Saved on this tablet — not yet at the station.")
    expect(saved).to_contain_text("The station checks every entry when it arrives")
    # The next step comes from the tablet's copy of the job, marked as such.
    expect(step).to_have_attribute("data-step-kind", "lockout")
    expect(page.get_by_test_id("tablet-copy")).to_contain_text("not yet at the station")
    _audit(page, "entry saved on the tablet")
    assert _stored(db_path, job_id, event_id) == []

    page.reload()  # still offline: the worker's copy of the job page, and the tablet's copy
    expect(page.get_by_test_id("outbox-notice")).to_contain_text(
        "copy of this page saved on this tablet")
    expect(step).to_have_attribute("data-step-kind", "lockout")
    expect(count).to_have_text("1 entry waiting to reach the station")
    expect(page.get_by_test_id("progress-kept-lethal-energy-breakers")).to_be_visible()
    _audit(page, "saved copy of the job page, offline")

    # A page never opened on this tablet: the station's offline page, with the safety notice
    # and no one's name on it (it was saved for whoever holds the tablet).
    page.goto(f"{live_server}/fleet?never-opened-here=1")
    expect(page.get_by_test_id("offline-page")).to_be_visible()
    expect(page.get_by_test_id("safety-notice")).to_be_visible()
    expect(page.get_by_test_id("who")).to_have_count(0)
    expect(count).to_have_text("1 entry waiting to reach the station")
    page.goto(f"{live_server}/jobs/{job_id}")

    network.restore()
    expect(step).to_have_attribute("data-step-id", "breakers")  # the station's next step
    wait_until(page, OUTBOX_EMPTY)
    expect(count).to_be_hidden()
    expect(page.get_by_test_id("outbox-notice")).to_be_hidden()
    stored = _stored(db_path, job_id, event_id)
    assert len(stored) == 1 and stored[0]["kind"] == "acknowledged"
    context.close()


def test_an_entry_delivered_twice_is_stored_once(browser, live_server, db_path):
    # No worker here: the page alone keeps and replays its outbox (as on a tablet whose
    # browser gives it no worker).
    context = browser.new_context(viewport=VIEWPORTS["tablet-portrait"],
                                  service_workers="block")
    page = context.new_page()
    open_removal_to_warning(page, live_server)
    job_id, event_id = _job_and_event(page)
    count = page.get_by_test_id("outbox-count")

    def answer_lost(route) -> None:
        route.fetch()  # the station gets the entry and stores it,
        route.abort("internetdisconnected")  # but its answer never reaches the tablet

    page.route("**/jobs/*/events", answer_lost)
    tap(page, "[data-testid=acknowledge]")
    expect(count).to_have_text("1 entry waiting to reach the station")
    page.unroute("**/jobs/*/events")
    assert len(_stored(db_path, job_id, event_id)) == 1
    entry = page.evaluate("async () => (await window.sparkwardOutbox.entries())[0]")
    assert entry["event_id"] == event_id

    page.reload()  # sent again on load: the station answers that it has it already
    wait_until(page, OUTBOX_EMPTY)
    expect(count).to_be_hidden()
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "breakers")

    # A second tab still holding the same entry sends it once more.
    other = context.new_page()
    other.goto(page.url)
    context.set_offline(True)  # (no worker here: this covers every request)
    other.evaluate("entry => window.sparkwardOutbox.keep(entry)", entry)
    for tab in (page, other):  # every tab shows what waits
        expect(tab.get_by_test_id("outbox-count")).to_have_text(
            "1 entry waiting to reach the station")
    context.set_offline(False)
    wait_until(other, OUTBOX_EMPTY)
    assert other.evaluate("window.sparkwardOutbox.refusals()") == []  # a duplicate is no refusal
    expect(page.get_by_test_id("outbox-count")).to_be_hidden()
    assert len(_stored(db_path, job_id, event_id)) == 1
    context.close()


def test_an_entry_the_station_refuses_on_replay_is_listed_with_its_reason(
        browser, live_server, db_path, station_api):
    context, network, page = _removal_on_a_tablet(browser, live_server, "phone-portrait")
    tap(page, "[data-testid=acknowledge]")
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-kind", "lockout")
    job_id, _ = _job_and_event(page)
    count = page.get_by_test_id("outbox-count")

    network.cut()
    # Meanwhile a second mechanic on the same job tags IGN-A at the station: the tablet
    # cannot know, so its own tag on IGN-A is kept, and refused when it arrives.
    answer = station_api("mech2").post_json(f"/api/jobs/{job_id}/events", {
        "id": str(uuid.uuid4()), "kind": "breaker_tagged", "step": "breakers",
        "data": {"breaker": "IGN-A", "tag": "T-9"}})
    assert answer.status_code == 201, answer.get_data(as_text=True)
    page.fill("[data-testid=tag-number-IGN-A]", "T-1")
    done_id = page.input_value("form:has([data-testid=tag-IGN-A]) [name=event_id]")
    tap(page, "[data-testid=tag-IGN-A]")
    expect(count).to_have_text("1 entry waiting to reach the station")

    network.restore()
    refused = page.get_by_test_id("outbox-refused")
    expect(refused).to_be_visible()
    expect(refused).to_contain_text("Not accepted by the station")
    wait_until(page, OUTBOX_EMPTY)
    expect(count).to_be_hidden()
    expect(page.get_by_test_id("tagged-IGN-A")).to_be_visible()  # the first one went in
    db = store.connect(db_path)
    try:
        reason = next(r["reason"] for r in job_store.refusals(db, job_id)
                      if r["event_id"] == done_id)
    finally:
        db.close()
    expect(page.get_by_test_id("refused-reason")).to_have_text(reason)
    expect(page.get_by_test_id("refused-entry")).to_contain_text("IGN-A")
    _audit(page, "an entry not accepted by the station")
    assert _stored(db_path, job_id, done_id) == []

    page.reload()  # it stays until the mechanic has read it
    expect(page.get_by_test_id("refused-reason")).to_have_text(reason)
    page.click("[data-testid=dismiss-refused]")
    expect(refused).to_be_hidden()
    wait_until(page, "async () => (await window.sparkwardOutbox.refusals()).length === 0")
    page.reload()
    expect(page.get_by_test_id("step")).to_be_visible()
    expect(refused).to_be_hidden()
    context.close()


def test_waiting_on_an_async_predicate_really_waits_and_can_fail(browser):
    context = browser.new_context()
    page = context.new_page()
    page.set_content("<p>nothing to wait for</p>")
    started = time.monotonic()
    with pytest.raises(AssertionError, match="still false"):
        wait_until(page, "async () => false", timeout_s=0.5)
    assert time.monotonic() - started >= 0.5
    wait_until(page, "async () => (await Promise.resolve(2)) === 2", timeout_s=0.5)
    context.close()
