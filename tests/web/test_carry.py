"""What a tablet carries of a job: its steps (fetched once) and the station's state of it
(in every job page and fragment), through the real app."""

from __future__ import annotations

import json
import re
import uuid
from html import unescape

from webapp.store import jobs as job_store

CARRY = re.compile(r'<section id="job"[^>]*\sdata-job-carry="([^"]*)"')


def _carry(html: str) -> dict:
    found = CARRY.search(html)
    assert found, "every job page and fragment carries the job's state"
    return json.loads(unescape(found.group(1)))


def _open(mech, engine_id=1, procedure="exciter-removal", channel="A") -> int:
    answer = mech.post_form("/jobs", {"engine": engine_id, "procedure": procedure,
                                      "channel": channel})
    assert answer.status_code == 303
    return int(answer.location.rsplit("/", 1)[1])


def _step(mech, job_id, step, kind="step_done", **data):
    answer = mech.post_form(f"/jobs/{job_id}/events", {
        "event_id": str(uuid.uuid4()), "kind": kind, "step": step, **data},
        headers={"HX-Request": "true"})
    assert answer.status_code == 200, answer.get_data(as_text=True)
    return answer.get_data(as_text=True)


def test_the_page_carries_the_job_as_the_station_knows_it(mechanic, db):
    job_id = _open(mechanic)
    state = _carry(mechanic.get(f"/jobs/{job_id}").get_data(as_text=True))
    assert state["job_id"] == job_id and state["next"] == "identify"
    assert state["completed"] == {} and state["status"] == "open"
    assert state["revision"] == job_store.job(db, job_id)["revision_hash"]
    # The wait the station asks for the fitted DC exciter: its data's 2 min (demo data), and
    # the margin a wait counted by the tablet's clock adds (domain/placement.py).
    assert state["discharge"] == {"discharge": 120.0} and state["counted_margin_s"] == 30.0

    fragment = _step(mechanic, job_id, "identify")
    after = _carry(fragment)  # the htmx answer brings the tablet's copy up to date
    assert after["next"] == "selectors-off"
    done = after["completed"]["identify"]
    assert done["by"] == "Aino Varga" and done["kind"] == "step_done"
    assert done["event_id"] == job_store.events(db, job_id)[-1]["id"]
    assert after["head"]["seq"] > state["head"]["seq"]


def test_the_steps_a_tablet_carries_say_which_it_may_record_offline_and_why_not(mechanic):
    job_id = _open(mechanic)
    answer = mechanic.get(f"/jobs/{job_id}/carry")
    assert answer.status_code == 200
    carried = answer.get_json()
    kinds = {s["id"]: s for s in carried["steps"]}
    assert carried["record_url"] == f"/jobs/{job_id}/events"
    assert [s["number"] for s in carried["steps"]] == list(range(1, len(kinds) + 1))
    for step in carried["steps"]:
        if step["kind"] in ("note", "warning", "caution", "discharge_wait"):
            assert step["offline"]
        if step["kind"] in ("sign", "ignition_run"):
            assert not step["offline"] and step["needs_station"]
    lockout = next(s for s in carried["steps"] if s["kind"] == "lockout")
    assert lockout["offline"] and lockout["breakers"][0]["id"]
    # The heading and text are the station's own rendering of the step.
    page = mechanic.get(f"/jobs/{job_id}").get_data(as_text=True)
    first = carried["steps"][0]["head"].strip()
    assert first in page


def test_only_people_who_work_jobs_get_them_and_unknown_jobs_are_404(app, login, mechanic):
    job_id = _open(mechanic)
    assert login("trainer").get(f"/jobs/{job_id}/carry").status_code == 403
    assert app.test_client().get(f"/jobs/{job_id}/carry").status_code in (302, 401)
    assert mechanic.get("/jobs/999999/carry").status_code == 404


def test_a_reading_step_carries_its_limits_units_and_instruments_worked_out_by_the_station(
        mechanic):
    job_id = _open(mechanic)
    carried = mechanic.get(f"/jobs/{job_id}/carry").get_json()
    steps = {s["id"]: s for s in carried["steps"]}
    assert carried["carried_on"] == steps["verify-isolation"]["carried_on"]  # the register's day
    assert carried["grounding_step"] == "ground-terminals"
    assert carried["grounding_valid_s"] == 15 * 60  # domain/isolation.py
    check = steps["verify-isolation"]
    assert check["offline"] and check["isolation"] and check["value"] == "number"
    assert check["limits"] == {"min": None, "max": 0.5} and check["unit"] == "V"
    # Conversions by pint on the station: value * factor + offset in the procedure's unit.
    units = {u["unit"]: u for u in check["units"]}
    assert units["kV"]["to_procedure"] == [1000.0, 0.0] and units["V"]["to_procedure"] == [1.0, 0.0]
    assert check["plausible"] == [0.0, 100_000.0] and check["dimension"] == "voltage"
    # A unit of another dimension carries the station's own sentence for it.
    assert check["wrong_units"]["mm"] == "'mm' is a unit of length, but voltage is needed here."
    register = {i["id"]: i for i in check["instruments"]}
    assert check["instrument_kind"] == "voltmeter" and register["VM-004"]["usable"]
    assert register["VM-004"]["to_range"] == {"V": [1.0, 0.0], "kV": [1000.0, 0.0]}
    assert not register["TW-009"]["usable"] and "to_range" not in register["TW-009"]
    assert steps["remove-unit"]["handles_lead"] and steps["remove-unit"]["disturbs"]
    assert steps["disconnect-leads"]["opens_lead"] and steps["ground-terminals"]["grounds_lead"]
    assert steps["removed-exciter"]["offline"] and steps["removed-exciter"]["action"] == "remove"


def test_a_part_put_on_needs_the_station_and_says_why(mechanic):
    job_id = _open(mechanic, procedure="exciter-installation")
    steps = mechanic.get(f"/jobs/{job_id}/carry").get_json()["steps"]
    fitted = [s for s in steps if s["kind"] == "part" and s["action"] == "install"]
    assert fitted and not fitted[0]["offline"]
    assert "may take" in fitted[0]["needs_station"]
    # Torque is carried: its fasteners, and the register's torque wrenches.
    bolts = next(s for s in steps if s["kind"] == "torque" and s["fasteners"])
    assert bolts["offline"] and bolts["instrument_kind"] == "torque wrench"
    assert bolts["unit"] == "lbf*in" and "lbf*in" in [u["unit"] for u in bolts["units"]]
    assert bolts["limits"] == {"min": 35, "max": 40}
    state = _carry(mechanic.get(f"/jobs/{job_id}").get_data(as_text=True))
    assert state["fasteners_done"][bolts["id"]] == []


def test_the_page_carries_the_fitted_parts_and_the_lead_as_the_station_knows_them(
        mechanic, db):
    from webapp.store import engines

    job_id = _open(mechanic)
    state = _carry(mechanic.get(f"/jobs/{job_id}").get_data(as_text=True))
    exciter = engines.current(db, 1).fitted("exciter", "A")
    assert state["fitted"]["exciter:A"]["serial"] == exciter.serial
    assert state["lead_grounded"] is None and state["isolation_verified"] is False
