"""The JSON API: opening jobs, posting events, idempotency, refusals and malformed input."""

from __future__ import annotations

import hashlib
import uuid

import pytest

from webapp.domain.chain import first_broken_link
from webapp.store import jobs as job_store

ROOT_TASKS = __import__("pathlib").Path(__file__).resolve().parents[2] / "tasks"


def engine_id(client, serial: str) -> int:
    fleet = client.get("/api/fleet").get_json()
    return next(e["id"] for a in fleet["aircraft"] for e in a["engines"] if e["serial"] == serial)


def open_removal(client, serial="QT6-10231", channel="A") -> dict:
    answer = client.post_json("/api/jobs", {"procedure": "exciter-removal",
                                            "engine": engine_id(client, serial),
                                            "channel": channel})
    assert answer.status_code == 201, answer.get_json()
    return answer.get_json()


def event(step: str | None, kind: str = "step_done", **data) -> dict:
    return {"id": str(uuid.uuid4()), "kind": kind, "step": step, "data": data,
            "device_time": "2026-12-01T08:00:05+00:00"}


def counts(db, job_id: int) -> tuple[int, int]:
    return len(job_store.events(db, job_id)), len(job_store.refusals(db, job_id))


def test_fleet_lists_engines_with_components(mechanic):
    fleet = mechanic.get("/api/fleet").get_json()
    assert len(fleet["aircraft"]) >= 3
    engine = fleet["aircraft"][0]["engines"][0]
    assert {"id", "serial", "model", "position", "components"} <= engine.keys()
    kinds = {(c["kind"], c["channel"]) for c in engine["components"]}
    assert {("exciter", "A"), ("exciter", "B"), ("plug", "A"), ("plug", "B")} <= kinds


def test_open_job_pins_the_sha256_of_the_approved_file(mechanic):
    job = open_removal(mechanic)
    text = (ROOT_TASKS / "exciter-removal.yaml").read_text(encoding="utf-8")
    assert job["revision"] == hashlib.sha256(text.encode("utf-8")).hexdigest()
    assert job["status"] == "open"
    assert job["next_step"] == "identify"
    assert [s["id"] for s in job["steps"]][:3] == ["identify", "selectors-off",
                                                   "lethal-energy-breakers"]


def test_dc_engine_job_leaves_out_the_ac_only_steps(mechanic):
    dc_job = open_removal(mechanic, "QT6-10231")   # DEMO-101: DC exciters
    ac_job = open_removal(mechanic, "QT6-10235")   # DEMO-103: AC exciters
    dc_steps = {s["id"] for s in dc_job["steps"]}
    ac_steps = {s["id"] for s in ac_job["steps"]}
    assert "ac-input-open" in ac_steps and "ac-input-open" not in dc_steps


def test_walk_info_warning_and_check_steps_in_order(mechanic, db):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    assert mechanic.post_json(url, event("identify")).status_code == 201
    assert mechanic.post_json(url, event("selectors-off", items=[0, 1, 2])).status_code == 201
    assert mechanic.post_json(url, event("lethal-energy-breakers", "acknowledged")
                              ).status_code == 201
    state = mechanic.get(f"/api/jobs/{job['id']}").get_json()
    assert state["done"] == ["identify", "selectors-off", "lethal-energy-breakers"]
    assert state["next_step"] == "breakers"
    events = job_store.events(db, job["id"])
    assert [e["kind"] for e in events] == ["job_opened", "step_done", "step_done", "acknowledged"]
    assert first_broken_link(events) is None


def test_same_event_twice_is_stored_once_and_answered_the_same(mechanic, db):
    job = open_removal(mechanic)
    body = event("identify")
    first = mechanic.post_json(f"/api/jobs/{job['id']}/events", body)
    again = mechanic.post_json(f"/api/jobs/{job['id']}/events", body)
    assert (first.status_code, again.status_code) == (201, 200)
    assert first.get_json() == again.get_json()
    assert counts(db, job["id"]) == (2, 0)


def test_event_id_reused_for_other_content_is_refused(mechanic, db):
    job = open_removal(mechanic)
    body = event("identify")
    mechanic.post_json(f"/api/jobs/{job['id']}/events", body)
    reused = mechanic.post_json(f"/api/jobs/{job['id']}/events",
                                {**body, "step": "selectors-off"})
    assert reused.status_code == 409
    assert reused.get_json()["rule"] == "event_id_reused"


@pytest.mark.parametrize("step, kind, data, rule", [
    ("selectors-off", "step_done", {"items": [0, 1, 2]}, "out_of_order"),
    ("identify", "acknowledged", {}, "wrong_event_for_step"),
    ("no-such-step", "step_done", {}, "unknown_step"),
])
def test_refused_events_name_their_rule_and_store_only_the_refusal(mechanic, db, step, kind,
                                                                   data, rule):
    job = open_removal(mechanic)
    answer = mechanic.post_json(f"/api/jobs/{job['id']}/events", event(step, kind, **data))
    assert answer.status_code == 409
    body = answer.get_json()
    assert body["rule"] == rule and body["reason"]
    assert counts(db, job["id"]) == (1, 1)
    assert job_store.refusals(db, job["id"])[0]["rule"] == rule


def test_check_with_items_needs_every_item(mechanic, db):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    mechanic.post_json(url, event("identify"))
    answer = mechanic.post_json(url, event("selectors-off", items=[0, 2]))
    assert answer.status_code == 409 and answer.get_json()["rule"] == "items_unconfirmed"
    assert counts(db, job["id"]) == (2, 1)


def test_step_already_done_is_refused(mechanic):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    mechanic.post_json(url, event("identify"))
    answer = mechanic.post_json(url, event("identify"))
    assert answer.status_code == 409 and answer.get_json()["rule"] == "already_done"


def test_lockout_is_not_done_until_every_breaker_is_tagged(mechanic):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    for body in (event("identify"), event("selectors-off", items=[0, 1, 2]),
                 event("lethal-energy-breakers", "acknowledged")):
        assert mechanic.post_json(url, body).status_code == 201
    answer = mechanic.post_json(url, event("breakers"))
    assert answer.status_code == 409
    assert answer.get_json()["rule"] == "lockout_incomplete"
    assert answer.get_json()["breakers"] == ["IGN-A", "IGN-B"]


@pytest.mark.parametrize("body, field", [
    ({"kind": "step_done", "step": "identify"}, "id"),
    ({"id": "not-a-uuid", "kind": "step_done", "step": "identify"}, "id"),
    ({"id": str(uuid.uuid4()), "kind": "teleport", "step": "identify"}, "kind"),
    ({"id": str(uuid.uuid4()), "kind": "step_done", "step": "identify", "extra": 1}, "extra"),
    ({"id": str(uuid.uuid4()), "kind": "step_done", "step": "identify",
      "device_time": "yesterday"}, "device_time"),
    ({"id": str(uuid.uuid4()), "kind": "step_done", "step": "identify",
      "device_time": "2026-12-01T08:00:00"}, "device_time"),  # no time zone
    ({"id": str(uuid.uuid4()), "kind": "step_done", "step": "identify", "data": [1]}, "data"),
    (["not", "an", "object"], "(body)"),
])
def test_malformed_events_are_answered_422_with_nothing_stored(mechanic, db, body, field):
    job = open_removal(mechanic)
    answer = mechanic.post_json(f"/api/jobs/{job['id']}/events", body)
    assert answer.status_code == 422
    problems = answer.get_json()["problems"]
    assert any(p["field"] == field for p in problems), problems
    assert counts(db, job["id"]) == (1, 0)


def test_body_that_is_not_json_is_422(mechanic, db):
    job = open_removal(mechanic)
    answer = mechanic.client.post(f"/api/jobs/{job['id']}/events", data="identify",
                                  content_type="text/plain",
                                  headers={"X-CSRFToken": mechanic.token})
    assert answer.status_code == 422
    assert counts(db, job["id"]) == (1, 0)


@pytest.mark.parametrize("body, status, rule", [
    ({"procedure": "exciter-removal", "engine": 99999, "channel": "A"}, 404, "not_found"),
    ({"procedure": "no-such-procedure", "engine": None, "channel": "A"}, 422, "malformed"),
    ({"procedure": "no-such-procedure", "engine": "E1", "channel": "A"}, 422, "malformed"),
    ({"procedure": "exciter-removal", "engine": "ENGINE", "channel": "C"}, 422, "malformed"),
])
def test_open_job_bad_input(mechanic, db, body, status, rule):
    before = db["jobs"].count
    answer = mechanic.post_json("/api/jobs", body)
    assert answer.status_code == status
    assert answer.get_json()["rule"] == rule
    assert db["jobs"].count == before


def test_open_job_channel_rules(mechanic, db):
    engine = engine_id(mechanic, "QT6-10231")
    no_channel = mechanic.post_json("/api/jobs", {"procedure": "exciter-removal",
                                                  "engine": engine, "channel": None})
    assert no_channel.status_code == 409 and no_channel.get_json()["rule"] == "channel_required"
    with_channel = mechanic.post_json("/api/jobs", {"procedure": "ignition-functional-check",
                                                    "engine": engine, "channel": "A"})
    assert with_channel.status_code == 409
    assert with_channel.get_json()["rule"] == "channel_not_applicable"
    assert db["jobs"].count == 0


def test_procedure_not_effective_for_the_engine_model(mechanic, db):
    from webapp.store import fleet

    aircraft = fleet.add_aircraft(db, "DEMO-900", "test airframe", "test operator")
    other = fleet.add_engine(db, aircraft, 1, "QT-999", "QT9-00001")
    for channel in ("A", "B"):
        fleet.add_component(db, kind="exciter", part_number="XEX-0", serial=f"E{channel}",
                            type="dc", engine_id=other, channel=channel)
        fleet.add_component(db, kind="plug", part_number="XIP-0", serial=f"P{channel}",
                            type="air-gap", engine_id=other, channel=channel)
    db.conn.commit()
    answer = mechanic.post_json("/api/jobs", {"procedure": "exciter-removal", "engine": other,
                                              "channel": "A"})
    assert answer.status_code == 409 and answer.get_json()["rule"] == "not_effective"


def test_two_jobs_open_at_once_on_different_engines(mechanic):
    first = open_removal(mechanic, "QT6-10231")
    second = open_removal(mechanic, "QT6-10233")
    mechanic.post_json(f"/api/jobs/{first['id']}/events", event("identify"))
    assert mechanic.get(f"/api/jobs/{first['id']}").get_json()["next_step"] == "selectors-off"
    assert mechanic.get(f"/api/jobs/{second['id']}").get_json()["next_step"] == "identify"


def test_unknown_job_is_404(mechanic):
    assert mechanic.get("/api/jobs/4242").status_code == 404
    assert mechanic.post_json("/api/jobs/4242/events", event("identify")).status_code == 404


def test_openapi_document_lists_every_api_route_and_event_kinds(client, app):
    from webapp.domain.execution import CLIENT_EVENT_KINDS

    doc = client.get("/api/openapi.json").get_json()
    assert doc["openapi"].startswith("3.")
    for rule in app.url_map.iter_rules():
        if rule.rule.startswith("/api/") and rule.rule != "/api/openapi.json":
            path = rule.rule.replace("<int:job_id>", "{job_id}")
            assert path in doc["paths"], path
    variants = doc["components"]["schemas"]["EventIn"]["oneOf"]  # one per kind, with its data
    assert [v["properties"]["kind"]["const"] for v in variants] == list(CLIENT_EVENT_KINDS)
    for variant in variants:
        data = variant["properties"]["data"]["$ref"].rsplit("/", 1)[-1]
        assert doc["components"]["schemas"][data]["additionalProperties"] is False, data


def test_healthz_answers_json(client):
    body = client.get("/healthz").get_json()
    assert body["status"] == "ok" and body["approved_procedures"] == 5
