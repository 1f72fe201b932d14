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
        if step["kind"] in ("reading", "sign", "ignition_run"):
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
