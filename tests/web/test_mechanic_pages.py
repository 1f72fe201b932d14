"""The mechanic's screens through Flask's client: fleet, engine, job steps, htmx fragments."""

from __future__ import annotations

import re
import uuid
from pathlib import Path

from webapp.store import jobs as job_store


def _event_id(html: str) -> str:
    return re.search(r'name="event_id" value="([^"]+)"', html).group(1)


def _open_from_engine_page(mech, engine_id=1, procedure="exciter-removal", channel="A"):
    page = mech.get(f"/fleet/engines/{engine_id}").get_data(as_text=True)
    assert f'data-testid="open-{procedure}-{channel or "all"}"' in page
    answer = mech.post_form("/jobs", {"engine": engine_id, "procedure": procedure,
                                      "channel": channel or ""})
    assert answer.status_code == 303
    return int(answer.location.rsplit("/", 1)[1])


def test_fleet_page_lists_aircraft_and_engines(mechanic):
    html = mechanic.get("/fleet").get_data(as_text=True)
    for registration in ("DEMO-101", "DEMO-102", "DEMO-103", "DEMO-104"):
        assert registration in html
    assert html.count('data-testid="engine-') == 8


def test_engine_page_offers_only_effective_procedures(mechanic):
    html = mechanic.get("/fleet/engines/1").get_data(as_text=True)
    assert 'data-testid="open-ignition-functional-check-all"' in html
    assert 'data-testid="open-exciter-removal-A"' in html
    assert 'data-testid="open-exciter-removal-B"' in html
    assert "XEX-1001-03" in html


def test_step_screen_shows_the_step_the_source_and_the_notice(mechanic):
    job_id = _open_from_engine_page(mechanic)
    html = mechanic.get(f"/jobs/{job_id}").get_data(as_text=True)
    assert 'data-step-id="identify"' in html
    assert "QT-610 Engine Maintenance Manual (demo data)" in html
    assert "approved maintenance data" in html
    assert "DEMO-101" in html and "Channel A" in html


def test_htmx_step_post_returns_the_fragment_with_vary(mechanic, db):
    job_id = _open_from_engine_page(mechanic)
    html = mechanic.get(f"/jobs/{job_id}").get_data(as_text=True)
    answer = mechanic.post_form(f"/jobs/{job_id}/steps/identify", {
        "event_id": _event_id(html), "kind": "step_done"}, headers={"HX-Request": "true"})
    assert answer.status_code == 200
    body = answer.get_data(as_text=True)
    assert body.lstrip().startswith('<section id="job"')
    assert "<html" not in body
    assert "HX-Request" in answer.headers["Vary"]
    assert 'data-step-id="selectors-off"' in body
    full = mechanic.get(f"/jobs/{job_id}")
    assert "HX-Request" in full.headers["Vary"] and "<html" in full.get_data(as_text=True)


def test_plain_form_post_redirects_303(mechanic):
    job_id = _open_from_engine_page(mechanic)
    html = mechanic.get(f"/jobs/{job_id}").get_data(as_text=True)
    answer = mechanic.post_form(f"/jobs/{job_id}/steps/identify", {
        "event_id": _event_id(html), "kind": "step_done"})
    assert answer.status_code == 303 and answer.location == f"/jobs/{job_id}"


def test_double_tap_on_done_stores_one_event(mechanic, db):
    job_id = _open_from_engine_page(mechanic)
    event_id = _event_id(mechanic.get(f"/jobs/{job_id}").get_data(as_text=True))
    for _ in range(2):
        mechanic.post_form(f"/jobs/{job_id}/steps/identify",
                           {"event_id": event_id, "kind": "step_done"})
    assert [e["kind"] for e in job_store.events(db, job_id)] == ["job_opened", "step_done"]


def test_unticked_items_are_refused_on_screen(mechanic, db):
    job_id = _open_from_engine_page(mechanic)
    mechanic.post_form(f"/jobs/{job_id}/steps/identify",
                       {"event_id": str(uuid.uuid4()), "kind": "step_done"})
    answer = mechanic.post_form(f"/jobs/{job_id}/steps/selectors-off", {
        "event_id": str(uuid.uuid4()), "kind": "step_done", "items_offered": "1",
        "items": ["0"]}, headers={"HX-Request": "true"})
    assert answer.status_code == 409
    body = answer.get_data(as_text=True)
    assert 'data-testid="refusal"' in body and "Every item" in body
    assert len(job_store.events(db, job_id)) == 2


def test_form_without_event_id_is_refused_and_stores_nothing(mechanic, db):
    job_id = _open_from_engine_page(mechanic)
    answer = mechanic.post_form(f"/jobs/{job_id}/steps/identify", {"kind": "step_done"})
    assert answer.status_code == 400
    assert len(job_store.events(db, job_id)) == 1


def test_job_resumes_for_another_mechanic_on_another_device(mechanic, login):
    job_id = _open_from_engine_page(mechanic)
    mechanic.post_form(f"/jobs/{job_id}/steps/identify",
                       {"event_id": str(uuid.uuid4()), "kind": "step_done"})
    other = login("mech2")
    fleet = other.get("/fleet").get_data(as_text=True)
    assert f'data-testid="resume-job-{job_id}"' in fleet
    html = other.get(f"/jobs/{job_id}").get_data(as_text=True)
    assert 'data-step-id="selectors-off"' in html
    assert "Aino Varga" in html  # who did step 1


def test_warning_reminder_shows_on_the_step_it_guards(mechanic):
    job_id = _open_from_engine_page(mechanic)
    for step, kind, extra in (("identify", "step_done", {}),
                              ("selectors-off", "step_done",
                               {"items_offered": "1", "items": ["0", "1", "2"]}),
                              ("lethal-energy-breakers", "acknowledged", {})):
        answer = mechanic.post_form(f"/jobs/{job_id}/steps/{step}",
                                    {"event_id": str(uuid.uuid4()), "kind": kind, **extra})
        assert answer.status_code == 303
    html = mechanic.get(f"/jobs/{job_id}").get_data(as_text=True)
    assert 'data-step-id="breakers"' in html and 'data-testid="reminders"' in html
    assert 'data-testid="tag-IGN-A"' in html  # the lockout asks for each breaker's tag


def test_supervisor_sees_the_event_log_with_hashes_and_refusals(mechanic, login, db):
    job_id = _open_from_engine_page(mechanic)
    mechanic.post_form(f"/jobs/{job_id}/steps/selectors-off",
                       {"event_id": str(uuid.uuid4()), "kind": "step_done"})
    html = login("super").get(f"/jobs/{job_id}/log").get_data(as_text=True)
    assert "job_opened" in html and "out_of_order" in html
    assert job_store.events(db, job_id)[0]["hash"][:12] in html


def test_trainer_previews_a_procedure(login):
    trainer = login("trainer")
    html = trainer.get("/procedures/igniter-plug-replacement").get_data(as_text=True)
    assert "Preliminary requirements" in html and "WARNING" in html
    assert trainer.get("/procedures/no-such").status_code == 404


def test_admin_enrols_a_person_and_bad_input_keeps_what_was_typed(login, db):
    admin = login("admin")
    bad = admin.post_form("/people", {"full_name": "Iris Demo", "username": "iris",
                                      "roles": ["mechanic"], "password": "short"})
    assert bad.status_code == 422
    assert "at least 8" in bad.get_data(as_text=True)
    assert 'value="Iris Demo"' in bad.get_data(as_text=True)
    assert db["people"].count == 5
    short_pin = admin.post_form("/people", {"full_name": "Iris Demo", "username": "iris",
                                            "roles": ["mechanic"], "password": "long-enough",
                                            "pin": "123"})
    assert short_pin.status_code == 422 and db["people"].count == 5
    good = admin.post_form("/people", {"full_name": "Iris Demo", "username": "iris",
                                       "roles": ["mechanic"], "password": "long-enough",
                                       "pin": "864213"})
    assert good.status_code == 200 and db["people"].count == 6
    assert db["signers"].count == 6  # the five demo people and Iris have signing keys


def test_progress_list_escapes_procedure_text(app):
    from webapp.domain.execution import Configuration, job_state
    from webapp.domain.procedure_files import parse_procedure
    from webapp.web.progress import progress_list

    text = (Path(__file__).resolve().parents[2] / "tasks" / "exciter-removal.yaml").read_text(
        encoding="utf-8").replace("Put the ignition and start selectors to OFF.",
                                  "Selectors <b>OFF</b> & tagged")
    procedure = parse_procedure(text)
    configuration = Configuration("A", ("dc",), ("air-gap",))
    state = job_state(procedure, [{"kind": "job_opened", "step_id": None,
                                   "data": configuration.as_data()}])
    with app.app_context():
        html = str(progress_list("test-revision", state, {}, lambda iso: iso))
    assert "Selectors &lt;b&gt;OFF&lt;/b&gt; &amp; tagged" in html
    assert "<b>" not in html
    assert html.count("<li ") == len(state.steps)
