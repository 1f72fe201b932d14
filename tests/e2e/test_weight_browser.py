"""What the tablet asks of the station, counted by the station itself: the worker's install
fetches each shell file once, a reload of an open job is one request, an offline reload none.

Requests are counted by an `after_request` hook on the real app (installed only here), so
the page's own requests and the service worker's are counted alike, as they reach the
station."""

from __future__ import annotations

import json
import re
import threading
import urllib.request
from collections import Counter

import pytest
from playwright.sync_api import expect
from werkzeug.serving import make_server

from webapp import create_app

from .conftest import log_in, wait_until
from .test_offline import PAGE_SAVED, WORKER_IN_CHARGE, Network

# Each wait below ends as soon as the station has been asked what a load asks; this settle
# time only lets late requests (a worker update check, a replay timer) be counted too.
SETTLE_MS = 2000


class RequestLog:
    """WSGI middleware around the real app: each request that reaches the station, with the
    status it finally went out with (after compression's own 304)."""

    def __init__(self, app) -> None:
        self.app = app
        self.seen: list[tuple[str, str, int]] = []

    def __call__(self, environ, start_response):
        query = environ.get("QUERY_STRING", "")
        path = environ["PATH_INFO"] + (f"?{query}" if query else "")

        def noting(status, headers, exc_info=None):
            self.seen.append((environ["REQUEST_METHOD"], path, int(status.split()[0])))
            return start_response(status, headers, exc_info)

        return self.app(environ, noting)


@pytest.fixture
def counted_station(db_path, station_clock):
    """A live station that logs every request it answers: (method, path with query, status)."""
    app = create_app({"DB_PATH": str(db_path), "SECRET_KEY": "e2e-secret",
                      "CLOCK": station_clock})
    log = RequestLog(app.wsgi_app)
    app.wsgi_app = log  # type: ignore[method-assign]
    server = make_server("127.0.0.1", 0, app, threaded=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.server_port}", log.seen
    server.shutdown()
    thread.join(timeout=5)


def shell_of(base: str) -> list[str]:
    """The shell's URLs as the station's /sw.js lists them."""
    with urllib.request.urlopen(f"{base}/sw.js", timeout=10) as answer:
        script = answer.read().decode()
    return json.loads(re.search(r"^const SHELL_FILES = (\[.*?\]);$", script,
                                re.M | re.S).group(1))


def shell_kept(count: int) -> str:
    """Predicate: the worker's shell cache holds `count` entries (the shell and /offline)."""
    return ("async () => { const names = await caches.keys();"
            " const shell = names.find((n) => n.startsWith('sparkward-shell-'));"
            " if (!shell) return false;"
            f" return (await (await caches.open(shell)).keys()).length === {count}; }}")


def test_install_fetches_each_file_once_and_a_reload_asks_one_thing(browser, counted_station):
    base, seen = counted_station
    shell = shell_of(base)
    seen.clear()
    # No route yet: Playwright's routing turns the browser's HTTP cache off, and that cache
    # is what serves the worker's install the files the page has just loaded.
    context = browser.new_context()
    page = context.new_page()
    log_in(page, base, "mech1", "demo-mech1")
    page.click("[data-testid=engine-QT6-10231]")
    page.click("[data-testid=open-exciter-removal-A]")
    step = page.get_by_test_id("step")
    expect(step).to_be_visible()
    job_path = page.url.removeprefix(base)
    page.wait_for_function(WORKER_IN_CHARGE, polling=50)
    wait_until(page, shell_kept(len(shell) + 1))

    asked = Counter(path for method, path, _status in seen if method == "GET")
    for url in [*shell, "/offline"]:
        assert asked[url] == 1, (url, asked[url], "\n".join(map(str, seen)))
    bare = {url.split("?")[0] for url in shell}
    assert not [path for path in asked if path in bare], "a shell file asked for by bare name"

    page.reload()  # through the worker now, which keeps this page
    wait_until(page, PAGE_SAVED)
    page.wait_for_timeout(SETTLE_MS)

    seen.clear()
    page.reload()
    expect(step).to_be_visible()
    expect(page.get_by_test_id("outbox-notice")).to_be_hidden()  # the station's own page
    page.wait_for_timeout(SETTLE_MS)
    # The page and its files: one request. Beside it the browser checks the worker for an
    # update (on each navigation, and on the page's register() call), answered 304 with no
    # body; only registering with updateViaCache "all" (static/js/sparkward.js, not touched
    # here) would let its HTTP cache answer those.
    assert [r for r in seen if r[1] != "/sw.js"] == [("GET", job_path, 200)]
    assert {r for r in seen if r[1] == "/sw.js"} <= {("GET", "/sw.js", 304)}

    Network(context).cut()
    seen.clear()
    page.reload()
    expect(page.get_by_test_id("outbox-notice")).to_contain_text(
        "copy of this page saved on this tablet")
    expect(step).to_be_visible()
    # Styles and scripts came from the worker: the page is styled and its scripts ran.
    assert page.evaluate("[...document.styleSheets].some((sheet) => sheet.cssRules.length > 50)")
    assert page.evaluate("typeof window.htmx === 'object' && !!window.sparkwardOutbox")
    page.wait_for_timeout(SETTLE_MS)
    # Nothing from the page or the worker. The browser's own check for a new worker is made
    # outside what Playwright's offline switch (and its routes) reach; with the Wi-Fi really
    # off it fails, and the page does not wait for it.
    assert [r for r in seen if r[1] != "/sw.js"] == []
    context.close()
