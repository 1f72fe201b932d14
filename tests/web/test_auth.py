"""Log-in, log-out, throttling and CSRF."""

from __future__ import annotations

import uuid

from tests.conftest import csrf_token_of


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


def test_wrong_password_is_refused_with_a_message(client):
    answer = _login(client, "mech1", "wrong-password")
    assert answer.status_code == 401
    assert "do not match" in answer.get_data(as_text=True)
    assert client.get("/fleet").status_code == 302


def test_log_in_is_throttled_after_repeated_failures(client, clock, app):
    for _ in range(app.config["LOGIN_MAX_FAILURES"]):
        assert _login(client, "mech1", "wrong-password").status_code == 401
    # Even the right password is refused while the name is locked...
    locked = _login(client, "mech1", "demo-mech1")
    assert locked.status_code == 401 and "Too many failed log-ins" in locked.get_data(
        as_text=True)
    # ...until the lock time has passed (the station's clock, moved without sleeping).
    clock.advance(app.config["LOGIN_LOCK_MINUTES"] * 60 + 1)
    assert _login(client, "mech1", "demo-mech1").status_code == 303


def test_log_in_only_redirects_within_the_station(client):
    token = csrf_token_of(client.get("/login").get_data(as_text=True))
    answer = client.post("/login?next=//elsewhere.invalid/x", data={
        "username": "mech1", "password": "demo-mech1", "csrf_token": token})
    assert answer.status_code == 303 and answer.location == "/"


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
