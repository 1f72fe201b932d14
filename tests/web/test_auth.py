"""Log-in, log-out, throttling, where a log-in leads, and CSRF."""

from __future__ import annotations

import uuid

import pytest

from tests.conftest import csrf_token_of
from webapp.web.auth import station_path


def _login(client, username, password):
    token = csrf_token_of(client.get("/login").get_data(as_text=True))
    return client.post("/login", data={"username": username, "password": password,
                                       "csrf_token": token})


def test_log_in_and_out(client):
    answer = _login(client, "mech1", "demo-mech1")
    assert answer.status_code == 303
    assert client.get("/fleet").status_code == 200
    token = csrf_token_of(client.get("/fleet").get_data(as_text=True))
    assert client.post("/logout", data={"csrf_token": token}).status_code == 303
    assert client.get("/fleet").status_code == 302
    # A copied cookie after log-out: tests/web/test_sessions.py.


def test_wrong_password_is_refused_with_a_message(client):
    answer = _login(client, "mech1", "wrong-password")
    assert answer.status_code == 401
    assert "do not match" in answer.get_data(as_text=True)
    assert client.get("/fleet").status_code == 302


def test_log_in_is_throttled_after_repeated_failures(client, clock, app):
    # The whole rule is tested in tests/web/test_login_throttle.py; here the short story.
    for _ in range(app.config["LOGIN_MAX_FAILURES"]):
        assert _login(client, "mech1", "wrong-password").status_code == 401
    # Even the right password is refused while the wait runs, and the page says how long...
    waiting = _login(client, "mech1", "demo-mech1")
    assert waiting.status_code == 429
    assert "Too many failed log-ins for this name from this network address: try again in " \
        "1 s." in waiting.get_data(as_text=True)
    # ...until it has passed (the station's clock, moved without sleeping).
    clock.advance(1)
    assert _login(client, "mech1", "demo-mech1").status_code == 303


# Where a log-in may lead: only a path on this station. Browsers read "/\\host" like
# "//host" and drop tabs and newlines from a URL (WHATWG URL Standard, from memory), so
# those are other sites too.
ELSEWHERE = [
    "//evil.invalid", "//evil.invalid/x", "/\\evil.invalid", "\\\\evil.invalid",
    "\\/evil.invalid", "/\t/evil.invalid", "/\n/evil.invalid", "/\r/evil.invalid",
    "/%09/evil.invalid", "/%0a/evil.invalid", "/%0D/evil.invalid", "/%2F%2Fevil.invalid",
    "/%2f/evil.invalid", "/%5Cevil.invalid", "/%5C%5Cevil.invalid", "/fleet\\x",
    "https://evil.invalid", "http:/evil.invalid", "javascript:alert(1)",
    "JaVaScRiPt:alert(1)", "data:text/html,x", "evil.invalid", "fleet", "", " /fleet",
    "/\u200e/evil.invalid", "/fleet\x00", "/" + "a" * 2001,
]
ON_THE_STATION = ["/", "/fleet", "/jobs/1?", "/jobs/12/steps/identify?tab=a%20b",
                  "/people#login-waits", "/fleet?q=%2F%2Fx"]


@pytest.mark.parametrize("target", ELSEWHERE)
def test_station_path_refuses_anything_but_a_path_here(target):
    assert station_path(target) is None


@pytest.mark.parametrize("target", ON_THE_STATION)
def test_station_path_keeps_a_path_here(target):
    assert station_path(target) == target


@pytest.mark.parametrize("raw_query", [
    # As a browser would send them, percent-encoded once...
    "next=//evil.invalid/x", "next=/%5Cevil.invalid", "next=%5C%5Cevil.invalid",
    "next=/%09/evil.invalid", "next=/%0a/evil.invalid", "next=https://evil.invalid",
    "next=https%3A%2F%2Fevil.invalid", "next=javascript:alert(1)",
    "next=%2F%2Fevil.invalid",
    # ...and twice (Werkzeug decodes once; the station decodes once more before judging).
    "next=/%2509/evil.invalid", "next=/%252F%252Fevil.invalid", "next=/%255Cevil.invalid",
])
def test_log_in_never_leads_to_another_site(client, raw_query):
    token = csrf_token_of(client.get("/login").get_data(as_text=True))
    answer = client.post("/login", query_string=raw_query, data={
        "username": "mech1", "password": "demo-mech1", "csrf_token": token})
    assert answer.status_code == 303 and answer.headers["Location"] == "/"


def test_log_in_leads_back_to_the_page_that_asked_for_it(client):
    sent = client.get("/jobs/1")
    assert sent.status_code == 302 and sent.location == "/login?next=/jobs/1?"
    token = csrf_token_of(client.get(sent.location).get_data(as_text=True))
    answer = client.post(sent.location, data={"username": "mech1", "password": "demo-mech1",
                                              "csrf_token": token})
    assert answer.status_code == 303 and answer.headers["Location"] == "/jobs/1"


def test_form_post_without_csrf_token_is_refused(client, db):
    answer = client.post("/login", data={"username": "mech1", "password": "demo-mech1"})
    assert answer.status_code == 400
    assert "security token" in answer.get_data(as_text=True)


def test_json_write_without_csrf_header_is_refused_and_stores_nothing(mechanic, db):
    body = {"procedure": "exciter-removal", "engine": 1, "channel": "A"}
    answer = mechanic.client.post("/api/jobs", json=body)
    assert answer.status_code == 400 and answer.get_json()["rule"] == "csrf"
    answer = mechanic.client.post("/api/jobs", json=body, headers={"X-CSRFToken": "forged"})
    assert answer.status_code == 400
    assert db["jobs"].count == 0
    assert mechanic.post_json("/api/jobs", body).status_code == 201


def test_event_post_without_csrf_header_is_refused(mechanic, db):
    mechanic.post_json("/api/jobs", {"procedure": "exciter-removal", "engine": 1,
                                     "channel": "A"})
    answer = mechanic.client.post("/api/jobs/1/events", json={
        "id": str(uuid.uuid4()), "kind": "step_done", "step": "identify"})
    assert answer.status_code == 400
    assert db["events"].count == 1  # only job_opened


def test_every_page_carries_the_csrf_meta_and_the_safety_notice(login):
    admin = login("admin")
    for url in ("/people",):
        html = admin.get(url).get_data(as_text=True)
        assert '<meta name="csrf-token"' in html
        assert "approved maintenance data" in html
