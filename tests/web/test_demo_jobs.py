"""The jobs the demo starts with: worked through the station's own rules, signed for real.

`sparkward demo` loads them after the scenario; the other tests start from an empty job
list, so this test loads them itself, on a copy of the demo station.
"""

from __future__ import annotations

import pytest

from tests.conftest import DEMO_PINS
from webapp.domain.signoff import awaiting_review
from webapp.records.signing import empty_signature_fields, verify_record
from webapp.station.authority import station_authority
from webapp.station.recording import engine_tags, load_job
from webapp.station.scenario import DemoJob, load_demo_jobs, read_scenario, scenario_path
from webapp.store import engines, signers
from webapp.store import jobs as job_store


@pytest.fixture
def demo_jobs(app, db, clock):
    authority = station_authority(app.config["DB_PATH"], "x", clock())
    with app.app_context():
        ids = load_demo_jobs(db, read_scenario(scenario_path()), clock(), authority)
    return ids, authority


def test_the_demo_starts_with_a_job_waiting_for_certification(demo_jobs, db, login):
    (check, *_), authority = demo_jobs
    state = load_job(db, check).state
    assert awaiting_review(state) and state.next_step.id == "certify"
    record = signers.latest_record(db, check)
    reports = verify_record(record["pdf"], authority.cert)
    assert [(r.signer, r.meaning.split(" (")[0]) for r in reports] == [
        ("Aino Varga", "Performed"), ("Tomas Reyes", "Performed")]
    assert all(r.intact and r.valid and r.trusted and not r.modified_after for r in reports)
    assert empty_signature_fields(record["pdf"]) == ["certify"]  # the supervisor's box
    # Nothing was refused on the way: the walk kept every rule.
    assert job_store.refusals(db, check) == []
    # The supervisor finds it in the queue and can certify it with the PIN.
    supervisor = login("super")
    assert f'data-testid="review-{check}"' in supervisor.client.get("/review").get_data(
        as_text=True)
    answer = supervisor.post_json(f"/api/jobs/{check}/events", {
        "id": "00000000-0000-4000-8000-00000000c0de", "kind": "signed", "step": "certify",
        "data": {"pin": DEMO_PINS["super"]}})
    assert answer.status_code == 201, answer.get_json()
    assert load_job(db, check).state.status == "complete"
    # Nothing on that engine is off or due: the certification releases it to service.
    assert answer.get_json()["data"]["release"]["released"] is True
    assert job_store.job(db, check)["progress"] == "released"


def test_the_demo_starts_with_a_removal_under_way_behind_its_tags(demo_jobs, db):
    (_, removal, *_), _ = demo_jobs
    job = load_job(db, removal)
    assert job.state.next_step.id == "discharge"
    assert job.state.power_off is not None                 # the input is disconnected
    tags = engine_tags(db, job.row["engine_id"])
    assert {t.breaker for t in tags.values()} == {"IGN-A", "IGN-B"}


def test_a_demo_job_naming_an_unknown_engine_is_refused(app, db, clock):
    scenario = read_scenario(scenario_path())
    wrong = scenario.model_copy(update={"jobs": [DemoJob(
        procedure="exciter-removal", engine="QT6-00000", channel="A", by="mech1")]})
    authority = station_authority(app.config["DB_PATH"], "x", clock())
    with app.app_context(), pytest.raises(ValueError, match="no engine 'QT6-00000'"):
        load_demo_jobs(db, wrong, clock(), authority)


def test_the_demo_shows_a_unit_off_for_repair_and_a_deferred_item(demo_jobs, db, login):
    (_, _, repair, lead), _ = demo_jobs
    # The certified removal: closed, not released, and the engine says why.
    assert job_store.job(db, repair)["progress"] == "closed, not released"
    certified = load_job(db, repair).state.completed["certify"]["data"]
    assert certified["release"]["released"] is False
    assert any("removed in job" in r for r in certified["release"]["reasons"])
    engine = engines.current(db, job_store.job(db, repair)["engine_id"])
    assert engine.fitted("exciter", "A") is None
    assert engine.removed[0].status == "unserviceable"
    # The lead inspection deferred a defect: an open item of its engine, a named limitation
    # of the release, shown on the engine page.
    lead_engine = job_store.job(db, lead)["engine_id"]
    items = engines.current(db, lead_engine).open_items
    assert [i.reference for i in items] == ["DD-2026-031"]
    release = load_job(db, lead).state.completed["certify"]["data"]["release"]
    assert release["limitations"] == [
        f"open item DD-2026-031 (job {lead}): Clamp 4 cushion perished; lead secure in the "
        "clamp, no chafing (demo); limit 50 engine hours or 2027-01-31"]
    page = login("mech1").get(f"/fleet/engines/{lead_engine}").get_data(as_text=True)
    assert 'data-testid="open-item-DD-2026-031"' in page
    assert job_store.refusals(db, repair) == [] and job_store.refusals(db, lead) == []
