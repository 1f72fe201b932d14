"""Shared fixtures: the demo station built once per session, copied fresh for each test."""

from __future__ import annotations

import os
import re
import shutil
from pathlib import Path

import pytest

from webapp import create_app, store
from webapp.clock import ManualClock
from webapp.station.library import load_shop_library
from webapp.station.scenario import read_scenario, scenario_path

ROOT = Path(__file__).resolve().parents[1]

# Keep Chromium off the network (TOOLCHAIN.md): no background look-ups, no other hosts.
CHROMIUM_FLAGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
    "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1, EXCLUDE localhost",
]


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    for item in items:
        if "tests/e2e/" in str(item.path).replace(os.sep, "/"):
            item.add_marker(pytest.mark.browser)


@pytest.fixture(scope="session")
def browser_type_launch_args(browser_type_launch_args):
    return {**browser_type_launch_args,
            "executable_path": os.environ.get("CHROMIUM_PATH", "/usr/bin/chromium"),
            "args": CHROMIUM_FLAGS}


@pytest.fixture(scope="session")
def demo_template(tmp_path_factory) -> Path:
    """The demo station's database, built once with the same loader the demo uses."""
    from webapp.station.authority import station_authority
    from webapp.station.scenario import load_scenario

    path = tmp_path_factory.mktemp("template") / "demo.db"
    db = store.create(path)
    clock = ManualClock()
    load_shop_library(db, clock())
    authority = station_authority(path, "Test station", clock())
    load_scenario(db, read_scenario(scenario_path()), clock(), authority)
    db.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    db.close()
    return path


@pytest.fixture
def clock() -> ManualClock:
    return ManualClock()


@pytest.fixture
def db_path(demo_template, tmp_path) -> Path:
    from webapp.station.authority import authority_folder

    path = tmp_path / "station.db"
    shutil.copyfile(demo_template, path)
    # The station's CA travels with its database: the demo people's certificates chain to it.
    shutil.copytree(authority_folder(demo_template), authority_folder(path))
    return path


@pytest.fixture
def app(db_path, clock):
    return create_app({"DB_PATH": str(db_path), "SECRET_KEY": "test-secret", "TESTING": True,
                       "CLOCK": clock})


@pytest.fixture
def db(app):
    connection = store.connect(app.config["DB_PATH"])
    yield connection
    connection.close()


@pytest.fixture
def client(app):
    return app.test_client()


def csrf_token_of(html: str) -> str:
    match = re.search(r'<meta name="csrf-token" content="([^"]+)"', html)
    assert match, "every page carries a csrf-token meta tag"
    return match.group(1)


DEMO_PINS = {"mech1": "135790", "mech2": "246802", "super": "802468"}  # demo data, invented
DEMO_PASSWORDS = {"mech1": "demo-mech1", "mech2": "demo-mech2", "super": "demo-super",
                  "trainer": "demo-trainer", "admin": "demo-admin"}


class LoggedIn:
    """A test client logged in as one demo person, with its CSRF token at hand."""

    def __init__(self, client, username: str) -> None:
        self.client = client
        page = client.get("/login")
        token = csrf_token_of(page.get_data(as_text=True))
        answer = client.post("/login", data={"username": username,
                                             "password": DEMO_PASSWORDS[username],
                                             "csrf_token": token})
        assert answer.status_code == 303, answer.get_data(as_text=True)
        self.token = csrf_token_of(client.get("/login").get_data(as_text=True))

    def get(self, url: str, **kw):
        return self.client.get(url, **kw)

    def post_json(self, url: str, body, **kw):
        return self.client.post(url, json=body, headers={"X-CSRFToken": self.token}, **kw)

    def post_form(self, url: str, data: dict, **kw):
        return self.client.post(url, data={**data, "csrf_token": self.token}, **kw)


@pytest.fixture
def login(app):
    """login("mech1") -> a fresh client logged in as that demo person."""
    return lambda username: LoggedIn(app.test_client(), username)


@pytest.fixture
def mechanic(login) -> LoggedIn:
    return login("mech1")
