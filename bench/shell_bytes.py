"""The tablet app's weight: bytes on the wire and requests to the station for a first visit
(log-in page to an open job, the worker's install included), a reload of the open job, and
a reload offline, in real headless Chromium, against the same visit with compression off
and against the bare log-in page, all measured in one run.

    .venv/bin/python bench/shell_bytes.py
    .venv/bin/python bench/shell_bytes.py --settle-ms 3000

Bytes are counted by a TCP relay between Chromium and the station (tests/e2e/station_proxy):
every byte of every answer, headers included, as it crossed the wire. Requests are counted
by WSGI middleware around the real app, with the status each went out with.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from playwright.sync_api import sync_playwright  # noqa: E402
from werkzeug.serving import make_server  # noqa: E402

from tests.conftest import CHROMIUM_FLAGS  # noqa: E402
from tests.e2e.station_proxy import StationProxy  # noqa: E402
from webapp import create_app, store  # noqa: E402
from webapp.station.authority import authority_folder, station_authority  # noqa: E402
from webapp.station.library import load_shop_library  # noqa: E402
from webapp.station.scenario import load_scenario, read_scenario, scenario_path  # noqa: E402

# Issue 13's targets.
FIRST_VISIT_TARGET = 60 * 1024
RELOAD_TARGET = 1
OFFLINE_TARGET = 0
MECHANIC, PASSWORD = "mech1", "demo-mech1"  # demo data, invented
WORKER_IN_CHARGE = ("() => navigator.serviceWorker.controller !== null && "
                    "navigator.serviceWorker.controller.state === 'activated'")
PAGE_SAVED = "async () => !!(await caches.match(location.href))"
SHELL_KEPT = ("async () => { const names = await caches.keys();"
              " const shell = names.find((n) => n.startsWith('sparkward-shell-'));"
              " return !!shell && (await (await caches.open(shell)).keys()).length > 0; }")


@dataclass
class Measure:
    bytes_down: int
    bytes_up: int
    requests: list[tuple[str, str, int]]

    @property
    def page_requests(self) -> int:
        """Requests from the page and its worker (the browser's worker checks apart)."""
        return sum(1 for r in self.requests if r[1] != "/sw.js")

    @property
    def worker_checks(self) -> int:
        return sum(1 for r in self.requests if r[1] == "/sw.js")


class RequestLog:
    def __init__(self, app: Any) -> None:
        self.app = app
        self.seen: list[tuple[str, str, int]] = []

    def __call__(self, environ: dict[str, Any], start_response: Any) -> Any:
        query = environ.get("QUERY_STRING", "")
        path = environ["PATH_INFO"] + (f"?{query}" if query else "")

        def noting(status: str, headers: Any, exc_info: Any = None) -> Any:
            self.seen.append((environ["REQUEST_METHOD"], path, int(status.split()[0])))
            return start_response(status, headers, exc_info)

        return self.app(environ, noting)


def build_station(folder: Path) -> Path:
    db_path = folder / "station.db"
    now = datetime.now(UTC).replace(microsecond=0) - timedelta(hours=1)
    db = store.create(db_path)
    try:
        load_shop_library(db, now)
        authority = station_authority(db_path, "Bench station", now)
        load_scenario(db, read_scenario(scenario_path()), now, authority)
    finally:
        db.close()
    return db_path


def station_copy(template: Path, folder: Path) -> Path:
    folder.mkdir()
    path = folder / "station.db"
    shutil.copyfile(template, path)
    shutil.copytree(authority_folder(template), authority_folder(path))
    return path


@contextmanager
def serving(db_path: Path, compress: bool) -> Iterator[tuple[StationProxy, RequestLog]]:
    app = create_app({"DB_PATH": str(db_path), "SECRET_KEY": "bench",
                      "COMPRESS_REGISTER": compress})
    log = RequestLog(app.wsgi_app)
    app.wsgi_app = log  # type: ignore[method-assign]
    server = make_server("127.0.0.1", 0, app, threaded=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    proxy = StationProxy(server.server_port)
    try:
        yield proxy, log
    finally:
        proxy.close()
        server.shutdown()
        thread.join(timeout=5)


def measured(proxy: StationProxy, log: RequestLog, action: Any, settle_ms: int,
             page: Any) -> Measure:
    proxy.reset_counts()
    log.seen.clear()
    action()
    page.wait_for_timeout(settle_ms)  # late requests (worker checks, timers) count too
    return Measure(proxy.bytes_to_tablet, proxy.bytes_to_station, list(log.seen))


def poll(page: Any, predicate: str, timeout_s: float = 20.0) -> None:
    for _ in range(int(timeout_s * 20)):
        if page.evaluate(predicate):
            return
        page.wait_for_timeout(50)
    raise SystemExit(f"still false after {timeout_s} s: {predicate}")


def visit(browser: Any, db_path: Path, compress: bool, settle_ms: int) -> dict[str, Measure]:
    """First visit, reload and offline reload of one open job, on one station copy."""
    with serving(db_path, compress) as (proxy, log):
        context = browser.new_context()  # no routes: they would turn the HTTP cache off
        page = context.new_page()
        base = proxy.url

        def first_visit() -> None:
            page.goto(f"{base}/login")
            page.fill("#username", MECHANIC)
            page.fill("#password", PASSWORD)
            page.click("[data-testid=login]")
            page.wait_for_url(f"{base}/fleet")
            page.click("[data-testid=engine-QT6-10231]")
            page.click("[data-testid=open-exciter-removal-A]")
            page.get_by_test_id("step").wait_for()
            page.wait_for_function(WORKER_IN_CHARGE, polling=50)
            poll(page, SHELL_KEPT)

        results = {"first visit": measured(proxy, log, first_visit, settle_ms, page)}
        page.reload()  # the first load the worker answers: it keeps the page
        poll(page, PAGE_SAVED)
        page.wait_for_timeout(settle_ms)
        results["reload"] = measured(proxy, log, page.reload, settle_ms, page)

        def offline_reload() -> None:
            context.route("**/*", lambda route: route.abort("internetdisconnected")
                          if route.request.service_worker else route.fallback())
            context.set_offline(True)
            page.reload()
            page.get_by_test_id("step").wait_for()

        results["offline reload"] = measured(proxy, log, offline_reload, settle_ms, page)
        context.close()
        return results


def bare_login(browser: Any, db_path: Path, settle_ms: int) -> Measure:
    """The log-in page alone, with its files, compressed, no worker: the floor of a visit."""
    with serving(db_path, True) as (proxy, log):
        context = browser.new_context(service_workers="block")
        page = context.new_page()
        result = measured(proxy, log, lambda: page.goto(f"{proxy.url}/login"), settle_ms, page)
        context.close()
        return result


def kb(n: int) -> str:
    return f"{n / 1024:.1f} KB"


def report(on: dict[str, Measure], off: dict[str, Measure], floor: Measure) -> None:
    print(f"bare log-in page (compressed, no worker): {kb(floor.bytes_down)} down, "
          f"{floor.page_requests} requests")
    print()
    print(f"{'measure':<16}{'compressed':>12}{'plain':>12}{'ratio':>8}{'vs log-in':>11}"
          f"{'requests':>10}{'worker checks':>15}  target")
    targets = {"first visit": f"<= {kb(FIRST_VISIT_TARGET)}",
               "reload": f"<= {RELOAD_TARGET} request", "offline reload": "0 requests"}
    for name in ("first visit", "reload", "offline reload"):
        a, b = on[name], off[name]
        ratio = f"{a.bytes_down / b.bytes_down:.2f}" if b.bytes_down else "-"
        versus = f"{a.bytes_down / floor.bytes_down:.2f}" if floor.bytes_down else "-"
        if name == "first visit":
            met = a.bytes_down <= FIRST_VISIT_TARGET
        elif name == "reload":
            met = a.page_requests <= RELOAD_TARGET
        else:
            met = a.page_requests == OFFLINE_TARGET
        print(f"{name:<16}{kb(a.bytes_down):>12}{kb(b.bytes_down):>12}{ratio:>8}{versus:>11}"
              f"{a.page_requests:>10}{a.worker_checks:>15}  {targets[name]}: "
              f"{'met' if met else 'NOT met'}")
    print()
    print("requests, compressed run (method, path, status):")
    for name, measure in on.items():
        print(f"  {name}: {len(measure.requests)}")
        for request in measure.requests:
            print(f"    {request}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--settle-ms", type=int, default=2000,
                        help="how long after each load late requests are still counted")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="sparkward-shell-bytes-") as tmp:
        folder = Path(tmp)
        template = build_station(folder)
        with sync_playwright() as playwright:
            browser = playwright.chromium.launch(executable_path="/usr/bin/chromium",
                                                 args=CHROMIUM_FLAGS)
            try:
                on = visit(browser, station_copy(template, folder / "on"), True,
                           args.settle_ms)
                off = visit(browser, station_copy(template, folder / "off"), False,
                            args.settle_ms)
                floor = bare_login(browser, station_copy(template, folder / "floor"),
                                   args.settle_ms)
            finally:
                browser.close()
    report(on, off, floor)
    return 0


if __name__ == "__main__":
    sys.exit(main())
