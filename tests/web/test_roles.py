"""Every route names the roles it allows, and each role gets exactly those."""

from __future__ import annotations

import pytest

from webapp.store.people import ROLES

USERS = {"mechanic": "mech1", "supervisor": "super", "trainer": "trainer", "admin": "admin"}

# A real URL for each GET route with arguments (job 1 is opened by the fixture below).
SAMPLE_ARGS = {"engine_id": 1, "job_id": 1, "procedure_id": "exciter-removal",
               "component_id": 3, "record_id": 1,  # 3: the DEMO-101 engine 1 channel A plug
               "person_id": 1,                     # 1: mech1, the first demo person enrolled
               "part_number": "XEX-1001-03", "serial": "XE-4401"}  # DEMO-101 engine 1 A exciter


def _routes(app):
    for rule in app.url_map.iter_rules():
        if rule.endpoint == "static":
            continue
        yield rule, app.view_functions[rule.endpoint]


def test_every_route_names_its_roles(app):
    unguarded = [rule.rule for rule, view in _routes(app)
                 if not getattr(view, "allowed_roles", None)]
    assert unguarded == []


def get_routes(app):
    return [(rule, view.allowed_roles) for rule, view in _routes(app)
            if "GET" in rule.methods and "anyone" not in view.allowed_roles]


@pytest.fixture
def job_one(login):
    mech = login("mech1")
    answer = mech.post_json("/api/jobs", {"procedure": "exciter-removal", "engine": 1,
                                          "channel": "A"})
    assert answer.status_code == 201 and answer.get_json()["id"] == 1


@pytest.mark.parametrize("role", ROLES)
def test_each_role_reaches_only_its_pages(app, login, job_one, role):
    client = login(USERS[role])
    checked = 0
    for rule, allowed in get_routes(app):
        url = rule.build(SAMPLE_ARGS, append_unknown=False)[1]
        answer = client.get(url)
        status = answer.status_code
        if role in allowed:
            expected = {"/": 302, "/jobs/1/record.pdf": 404,  # job 1 is unsigned
                        "/jobs/1/records/1.pdf": 404}.get(url, 200)
            assert status == expected, (url, status)
            if status == 200 and answer.mimetype == "text/html":
                # Every page's footer defers to the approved data and the regulations.
                assert 'data-testid="safety-notice"' in answer.get_data(as_text=True), url
        else:
            assert status == 403, (url, status)
        checked += 1
    assert checked >= 8


def test_strangers_are_sent_to_log_in_and_api_answers_401(app, client):
    for rule, _allowed in get_routes(app):
        url = rule.build(SAMPLE_ARGS, append_unknown=False)[1]
        answer = client.get(url)
        if url.startswith("/api/"):
            assert answer.status_code == 401, url
        else:
            assert answer.status_code == 302 and "/login" in answer.location, url


@pytest.mark.parametrize("username", ["super", "trainer", "admin"])
def test_only_mechanics_write_job_events(login, job_one, username):
    other = login(username)
    answer = other.post_json("/api/jobs/1/events", {
        "id": "0b9c7b3e-6d0e-4c52-9d1a-6f0f5b7b1a11", "kind": "step_done", "step": "identify"})
    assert answer.status_code == 403
    assert other.post_json("/api/jobs", {"procedure": "exciter-removal", "engine": 1,
                                         "channel": "A"}).status_code == 403


def test_public_routes_need_no_log_in(client):
    assert client.get("/login").status_code == 200
    assert client.get("/healthz").status_code == 200
    assert client.get("/api/openapi.json").status_code == 200
