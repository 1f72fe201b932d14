"""A real station on a free port over a copy of the demo database, for Chromium to use."""

from __future__ import annotations

import threading
import time
from contextlib import contextmanager
from datetime import UTC, datetime

import pytest
from playwright.sync_api import Error as PlaywrightError
from werkzeug.serving import make_server

from webapp import create_app
from webapp.clock import ManualClock


@pytest.fixture
def station_clock():
    """The station's clock for browser tests: starts at the real time, moves when told."""
    return ManualClock(datetime.now(UTC).replace(microsecond=0))


@contextmanager
def serving(db_path, station_clock, **settings):
    """The real station on a free port over `db_path`, with `settings` in its config;
    yields its port, and stops it afterwards."""
    app = create_app({"DB_PATH": str(db_path), "SECRET_KEY": "e2e-secret",
                      "CLOCK": station_clock, **settings})
    server = make_server("127.0.0.1", 0, app, threaded=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield server.server_port
    finally:
        server.shutdown()
        thread.join(timeout=5)


@pytest.fixture
def live_server(db_path, station_clock):
    with serving(db_path, station_clock) as port:
        yield f"http://127.0.0.1:{port}"


def stored_events(db_path, job_id: int) -> list[dict]:
    """The job's events as the station stored them (its own database file, read directly)."""
    from webapp import store
    from webapp.store import jobs as job_store

    db = store.connect(db_path)
    try:
        return job_store.events(db, job_id)
    finally:
        db.close()


def log_in(page, base_url: str, username: str, password: str) -> None:
    page.goto(f"{base_url}/login")
    page.fill("#username", username)
    page.fill("#password", password)
    page.click("[data-testid=login]")
    page.wait_for_url(f"{base_url}/fleet")


def wait_until(page, predicate: str, timeout_s: float = 10.0) -> None:
    """Poll a predicate (sync or async: `page.evaluate` awaits its promise and returns the
    value) until it is true; fail after `timeout_s`. Never give an async predicate to
    `page.wait_for_function`: its promise is truthy, so that wait returns at once."""
    deadline = time.monotonic() + timeout_s
    while not _evaluated(page, predicate):
        if time.monotonic() > deadline:
            raise AssertionError(f"still false after {timeout_s} s: {predicate}")
        page.wait_for_timeout(50)


def _evaluated(page, predicate: str):
    """The predicate's value, or False while the page is between two documents (a reload
    under way destroys the context the predicate ran in: the next poll asks the new one)."""
    try:
        return page.evaluate(predicate)
    except PlaywrightError as error:
        if "context was destroyed" in str(error) or "navigat" in str(error):
            return False
        raise


def tap(page, selector: str) -> None:
    """Click a control that htmx sends, then wait until the station's answer is swapped in
    (acting on the old screen while a swap is on its way loses what was typed)."""
    page.click(selector)
    page.wait_for_function(
        "() => !document.querySelector('.htmx-request, .htmx-swapping')")


def open_removal_to_warning(page, base_url: str) -> None:
    """mech1 opens the exciter removal on DEMO-101 engine 1 channel A and does its first two
    steps (identify; selectors off, every item ticked): the lethal-energy WARNING is next."""
    log_in(page, base_url, "mech1", "demo-mech1")
    page.click("[data-testid=engine-QT6-10231]")
    page.click("[data-testid=open-exciter-removal-A]")
    tap(page, "[data-testid=done]")
    for index in range(3):
        page.check(f"[data-testid=item-{index}]")
    tap(page, "[data-testid=done]")


@pytest.fixture
def station_api(db_path, station_clock):
    """The station's own web app over the live server's database file and clock, for work a
    test does before (or beside) the browser: `station_api("mech1")` is that person's client.
    The browser tests then meet that work as a tablet would."""
    from tests.conftest import LoggedIn
    from webapp import store

    app = create_app({"DB_PATH": str(db_path), "SECRET_KEY": "pre-walk-secret",
                      "CLOCK": station_clock, "TESTING": True})
    db = store.connect(db_path)

    def client(username: str) -> LoggedIn:
        return LoggedIn(app.test_client(), username)

    client.db = db  # type: ignore[attr-defined]
    yield client
    db.close()


def fill_part(page, part_number: str, serial: str, *, removed: bool, tag_or_release: str,
              hours: str = "812", starts: str = "760") -> None:
    """Fill a part step's typed fields and record them (status unserviceable, reason failed
    for a removal; condition new for a fitting)."""
    page.fill("[data-testid=part-number]", part_number)
    page.fill("[data-testid=part-serial]", serial)
    if removed:
        page.check("[data-testid=status-unserviceable]")
        page.check("[data-testid=reason-failed]")
        page.fill("[data-testid=part-tag]", tag_or_release)
    else:
        page.fill("[data-testid=part-release]", tag_or_release)
        page.check("[data-testid=condition-new]")
    page.fill("[data-testid=part-engine-hours]", hours)
    page.fill("[data-testid=part-starts]", starts)
    tap(page, "[data-testid=record-part]")


TABLET_SCRIPTS = ("sparkwardTabletRules", "sparkwardTabletReading", "sparkwardTabletLead",
                  "sparkwardTabletPart", "sparkwardTabletTorque", "sparkwardTabletJob")


@pytest.fixture
def tablet_page(browser, live_server):
    """mech1 logged in, every tablet script loaded: the parity tests call their rules."""
    context = browser.new_context()
    page = context.new_page()
    log_in(page, live_server, "mech1", "demo-mech1")
    page.wait_for_function("() => " + " && ".join(f"!!window.{name}"
                                                  for name in TABLET_SCRIPTS))
    yield page
    context.close()
