"""A Wi-Fi that connects but never answers: the worker gives up on the station after its
patience and shows the tablet's kept copy of the page with the time it was saved, or the
offline page for a page never kept; the station's late answer is still kept for next time."""

from __future__ import annotations

import re
import time
from pathlib import Path

import pytest
from playwright.sync_api import expect

from .conftest import log_in, wait_until
from .station_proxy import StationProxy
from .test_offline import PAGE_SAVED, WORKER_IN_CHARGE

WORKER = Path(__file__).resolve().parents[2] / "static" / "js" / "sw.js"
PATIENCE_S = int(re.search(r"^const STATION_PATIENCE_MS = (\d+);", WORKER.read_text(),
                           re.M).group(1)) / 1000
MARGIN_S = 4.0  # a loaded 2-core machine: rendering and the cache read, well within this
assert PATIENCE_S <= 10, "a page load waits a few seconds, not minutes"


def saved_at(page) -> str | None:
    """When the worker kept this URL's page (its own header on the kept copy)."""
    return page.evaluate("""async (href) => {
        const kept = await caches.match(href);
        return kept ? kept.headers.get('X-Sparkward-Saved-At') : null; }""", page.url)


@pytest.fixture
def proxy(live_server):
    relay = StationProxy(int(live_server.rsplit(":", 1)[1]))
    yield relay
    relay.close()


def test_a_station_that_never_answers_gives_the_kept_copy_in_time(browser, proxy):
    base = proxy.url
    context = browser.new_context()
    page = context.new_page()
    log_in(page, base, "mech1", "demo-mech1")
    page.click("[data-testid=engine-QT6-10231]")
    page.click("[data-testid=open-exciter-removal-A]")
    step = page.get_by_test_id("step")
    expect(step).to_be_visible()
    job_url = page.url
    page.wait_for_function(WORKER_IN_CHARGE, polling=50)
    page.reload()  # through the worker, which keeps the page
    wait_until(page, PAGE_SAVED)
    first_saved = saved_at(page)
    assert first_saved

    proxy.hold()  # connections still open; nothing comes back
    started = time.monotonic()
    page.reload(timeout=(PATIENCE_S + MARGIN_S) * 1000)
    notice = page.get_by_test_id("outbox-notice")
    expect(notice).to_contain_text("copy of this page saved on this tablet at "
                                   f"{first_saved[:10]} {first_saved[11:16]} UTC")
    took = time.monotonic() - started
    assert PATIENCE_S - 0.5 <= took <= PATIENCE_S + MARGIN_S, took
    expect(step).to_be_visible()
    assert page.locator("meta[name=sparkward-saved-copy]").get_attribute("content") == \
        first_saved

    # A page this tablet never kept: the offline page, as quickly.
    started = time.monotonic()
    page.goto(f"{base}/fleet?never-kept-here=1", timeout=(PATIENCE_S + MARGIN_S) * 1000)
    expect(page.get_by_test_id("offline-page")).to_be_visible()
    assert time.monotonic() - started <= PATIENCE_S + MARGIN_S

    # The station answers at last: the job page it sends now is kept for the next time.
    proxy.release()
    wait_until(page, f"""async () => {{
        const kept = await caches.match({job_url!r});
        const at = kept && kept.headers.get('X-Sparkward-Saved-At');
        return !!at && at > {first_saved!r}; }}""", timeout_s=15)
    context.close()


def test_an_answer_in_time_is_the_stations_page(browser, proxy):
    """Control: with the relay flowing, a reload is the station's page, not the copy."""
    context = browser.new_context()
    page = context.new_page()
    log_in(page, proxy.url, "mech1", "demo-mech1")
    page.wait_for_function(WORKER_IN_CHARGE, polling=50)
    page.reload()
    wait_until(page, PAGE_SAVED)
    page.reload()
    expect(page.get_by_test_id("who")).to_be_visible()
    assert page.locator("meta[name=sparkward-saved-copy]").count() == 0
    assert proxy.bytes_to_tablet > 0 and proxy.bytes_to_station > 0
    context.close()
