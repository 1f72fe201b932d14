"""Combination exciters and limits by part number through the JSON API, as a tablet sends
them, and on the printed record.

DEMO-104 carries an invented combination unit (XEX-5200-01): start mode 55-95/min, rated
12 J; continuous mode 40-80/min, rated 2 J; both channels twice those (demo values,
invented, from tasks/ignition-functional-check.yaml). A timed count's rate is N / T × 60
(textbook); 36 in 30 s = 72/min, 70 in 30 s = 140/min.
"""

from __future__ import annotations

import io

import pytest
from pypdf import PdfReader

from tests.web.jobs import Job, _event
from webapp.records import pdf
from webapp.store import fleet as fleet_store
from webapp.store import jobs as job_store


def _engine(db, serial):
    return next(e["id"] for a in fleet_store.fleet(db) for e in a["engines"]
                if e["serial"] == serial)


@pytest.fixture
def combination_check(mechanic, db, clock):
    job = Job(mechanic, db, clock, "ignition-functional-check", channel=None,
              engine=_engine(db, "QT6-10237"))   # DEMO-104 engine 1 (invented)
    job.walk_to("count-a-start")
    return job


def _counted(job, step, count, mode, window_s=30):
    job.start_count(step)
    job.clock.advance(window_s)
    return job.post(_event(step, "sparks_counted", method="timed", count=count,
                           window_s=window_s, mode=mode, supply={"voltage": "27.5"}))


def _refused_as_input(job, step, count, mode, field):
    before = len(job_store.events(job.db, job.id))
    answer = _counted(job, step, count, mode)
    assert answer.status_code == 422, answer.get_json()
    body = answer.get_json()
    assert body["rule"] == "bad_input" and body["problems"][0]["field"] == f"data.{field}"
    # Only the count's start went in; the count itself is not stored.
    assert len(job_store.events(job.db, job.id)) == before + 1
    assert job.state()["next_step"] == step
    return body["problems"][0]


def test_a_combination_unit_is_counted_in_both_modes_each_against_its_own_limits(
        combination_check):
    job = combination_check
    steps = [s["id"] for s in job.state()["steps"] if s["kind"] == "spark_count"]
    assert steps == ["count-a-start", "count-a-continuous", "count-b-start",
                     "count-b-continuous", "count-both-start", "count-both-continuous"]
    # 45 in 30 s = 90/min: within the start mode's 55-95 ...
    assert _counted(job, "count-a-start", 45, "start").status_code == 201
    # ... and out of the continuous mode's 40-80: a finding is needed.
    assert _counted(job, "count-a-continuous", 45, "continuous").status_code == 201
    readings = job.client.get(f"/api/jobs/{job.id}").get_json()
    assert readings["next_step"] == "count-a-continuous"
    stored = [e["data"] for e in job_store.events(job.db, job.id)
              if e["kind"] == "sparks_counted"]
    assert [(d["mode"], d["verdict"], d["limits"]) for d in stored] == [
        ("start", "within", {"min": 55.0, "max": 95.0}),
        ("continuous", "out of limits", {"min": 40.0, "max": 80.0})]
    assert stored[0]["exciters"] == {"A": "XEX-5200-01"}
    assert stored[0]["supply"]["exciter_types"] == ["combination"]
    assert stored[0]["supply"]["limits_from"] == "procedure, combination units"


def test_a_count_in_the_wrong_mode_or_without_one_is_refused_and_stores_nothing(
        combination_check):
    job = combination_check
    said = _refused_as_input(job, "count-a-start", 36, "continuous", "mode")
    assert "high-energy start" in str(said), said
    _refused_as_input(job, "count-a-start", 36, "", "mode")
    _refused_as_input(job, "count-a-start", 36, "boost", "mode")
    assert _counted(job, "count-a-start", 36, "start").status_code == 201


def test_the_job_cannot_go_past_a_mode_not_counted(combination_check):
    job = combination_check
    assert _counted(job, "count-a-start", 36, "start").status_code == 201
    # The continuous mode is the next step: nothing after it is taken, and the job's
    # signatures cannot be reached.
    job.refused(_event("cross-connection-a", "reading_recorded", result="pass"),
                "out_of_order")
    job.refused(_event("sign-selector", "signed", pin="135790"), "out_of_order")
    assert job.state()["status"] == "open"
    assert job.state()["next_step"] == "count-a-continuous"


def test_the_both_channels_check_uses_counts_of_the_same_mode(combination_check):
    job = combination_check
    for step, mode in (("count-a-start", "start"), ("count-a-continuous", "continuous")):
        assert _counted(job, step, 36, mode).status_code == 201
    job.walk_to("count-b-start")
    for step, mode in (("count-b-start", "start"), ("count-b-continuous", "continuous")):
        assert _counted(job, step, 36, mode).status_code == 201
    job.walk_to("count-both-start")
    assert _counted(job, "count-both-start", 70, "start").status_code == 201
    both = [e["data"] for e in job_store.events(job.db, job.id)
            if e["kind"] == "sparks_counted"][-1]
    # Start-mode A 72 + B 72 = 144/min expected; 140/min counted: within ±8 (+ resolution).
    assert both["both_check"]["expected"] == 144.0
    assert both["mode"] == "start" and both["verdict"] == "within"


def test_a_limits_row_by_part_number_is_used_and_stored(mechanic, db, clock):
    # DEMO-102 carries XEX-2040-01: its row is 60-100/min (demo, invented); the default
    # row is 55-95. 29 in 30 s = 58/min: within the default, out of the part's row.
    job = Job(mechanic, db, clock, "ignition-functional-check", channel=None,
              engine=_engine(db, "QT6-10233"))
    job.walk_to("count-a")
    assert _counted(job, "count-a", 29, None).status_code == 201
    stored = [e["data"] for e in job_store.events(db, job.id)
              if e["kind"] == "sparks_counted"][-1]
    assert stored["limits"] == {"min": 60.0, "max": 100.0}
    assert stored["limits_from"] == "XEX-2040-01"
    assert stored["verdict"] == "out of limits"
    assert stored["supply"]["limits_from"] == "procedure, transistorised units"


def test_a_mode_on_a_count_that_has_none_is_refused(mechanic, db, clock):
    job = Job(mechanic, db, clock, "ignition-functional-check", channel=None)   # DEMO-101
    job.walk_to("count-a")
    _refused_as_input(job, "count-a", 36, "start", "mode")


def test_the_record_prints_each_count_s_limits_and_where_they_came_from(
        app, mechanic, db, clock):
    job = Job(mechanic, db, clock, "ignition-functional-check", channel=None,
              engine=_engine(db, "QT6-10233"))
    job.walk_to("count-a")
    assert _counted(job, "count-a", 36, None).status_code == 201
    with app.app_context():
        data, _ = pdf.render_for_signing(db, job.id, clock(), [])
    text = " ".join(" ".join(p.extract_text() for p in PdfReader(io.BytesIO(data)).pages)
                    .split())
    assert "60 to 100 per minute (row for part number XEX-2040-01)" in text
    assert "exciter A XEX-2040-01" in text


def test_the_record_prints_a_combination_count_s_mode(app, combination_check, db, clock):
    job = combination_check
    assert _counted(job, "count-a-start", 36, "start").status_code == 201
    with app.app_context():
        data, _ = pdf.render_for_signing(db, job.id, clock(), [])
    text = " ".join(" ".join(p.extract_text() for p in PdfReader(io.BytesIO(data)).pages)
                    .split())
    assert "high-energy start mode: 55 to 95 per minute (procedure)" in text
