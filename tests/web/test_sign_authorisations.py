"""Who may sign, through the JSON API as the wrong person would try it, and what the sign
screens offer: the PIN box only to a person the station would let sign.

The demo people's authorisations (demo_scenarios/bramblecoast.yaml, invented): mech1 may
perform, mech2 perform and inspect, super inspect and certify, all within ATA 74, valid
through 2027-12-31. The station's clock starts on 2026-12-01.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.conftest import DEMO_PASSWORDS, DEMO_PINS, LoggedIn
from tests.pdf_text import pdf_text
from tests.web.jobs import Job, _event, functional_check_counted
from webapp.station.accounts import enrol
from webapp.station.authority import station_authority
from webapp.station.library import load_shop_library
from webapp.store import jobs as job_store
from webapp.store import people, signers

DAY = 24 * 3600


def sign(step, username):
    return _event(step, "signed", pin=DEMO_PINS[username])


@pytest.fixture
def check(login, db, clock):
    """A functional check walked by mech1, with mech2 counting the snaps at the engine: both
    did work on it. Waits at its first performer line (sign-selector)."""
    mech1, mech2 = login("mech1"), login("mech2")
    job = functional_check_counted(mech1, mech2, db, clock)
    job.mech2 = mech2
    return job


def _screen(client, job):
    return client.get(f"/jobs/{job.id}").get_data(as_text=True)


def test_one_mechanic_cannot_sign_both_performer_lines(check):
    signed = check.ok(sign("sign-selector", "mech1")).get_json()
    # The signature names the authorisation it rests on: number and kind.
    assert signed["data"]["authorisation"] == "BCA-CA-0147"
    assert signed["data"]["licence_kind"] == "Company authorisation (demo) — mechanic"
    refusal = check.refused(sign("sign-engine", "mech1"), "performer_signs_once")
    assert refusal["reason"].startswith("You already signed step")
    # mech1's screen says so instead of asking for the PIN; mech2's asks for it.
    mine = _screen(check.client, check)
    assert 'data-testid="sign-refused"' in mine and 'data-testid="pin"' not in mine
    assert "You already signed step" in mine
    theirs = _screen(check.mech2, check)
    assert 'data-testid="pin"' in theirs and 'data-testid="sign-refused"' not in theirs
    assert 'data-testid="sign-licence">BCA-CA-0152<' in theirs
    check.ok(sign("sign-engine", "mech2"), client=check.mech2)


def test_a_supervisor_who_did_no_work_cannot_sign_as_performer(check, login):
    supervisor = login("super")
    refusal = check.refused(sign("sign-selector", "super"), "performer_did_no_work",
                            client=supervisor)
    assert refusal["reason"].startswith("You recorded no work on this job")
    assert "You recorded no work on this job" in _screen(supervisor, check)


def test_a_mechanic_who_did_no_work_cannot_sign_as_performer(login, db, clock):
    job = Job(login("mech1"), db, clock, "ignition-functional-check", channel=None)
    job.walk_to("sign-selector")
    job.refused(sign("sign-selector", "mech2"), "performer_did_no_work", client=login("mech2"))


@pytest.fixture
def plug_job(login, db, clock):
    """An igniter plug replacement (performer, then an independent inspector) walked by
    mech1 to its performer line."""
    job = Job(login("mech1"), db, clock, "igniter-plug-replacement")
    job.walk_to("performer")
    return job


def test_a_mechanic_cannot_inspect_their_own_work(plug_job, login):
    plug_job.ok(sign("performer", "mech1"))
    refusal = plug_job.refused(sign("inspector", "mech1"), "inspector_is_performer")
    assert refusal["reason"] == "You performed this work: another person inspects it."
    assert refusal["reason"] in _screen(plug_job.client, plug_job)
    inspected = plug_job.ok(sign("inspector", "mech2"), client=login("mech2")).get_json()
    assert inspected["data"]["meaning"] == "Inspected"
    assert inspected["data"]["authorisation"] == "BCA-CA-0152"


def test_an_inspector_needs_the_inspect_authorisation(login, db, clock):
    mech2 = login("mech2")
    job = Job(mech2, db, clock, "igniter-plug-replacement")
    job.walk_to("performer")
    job.ok(sign("performer", "mech2"))
    mech1 = login("mech1")      # did no work here, but may only perform
    refusal = job.refused(sign("inspector", "mech1"), "authorisation_missing", client=mech1)
    assert refusal["reason"].startswith("No authorisation of yours covers inspecting "
                                        "ATA 74-20 (inspection)")
    assert 'data-testid="pin"' not in _screen(mech1, job)


def test_a_performer_whose_authorisation_expired_is_refused_with_its_date(check, login):
    check.clock.advance(400 * DAY)           # 2028-01-05: past the demo's 2027-12-31
    check.client = login("mech1")            # a new log-in: sessions end after 12 h
    refusal = check.refused(sign("sign-selector", "mech1"), "authorisation_expired")
    assert "(expired 2027-12-31)" in refusal["reason"]
    assert refusal["expired_on"] == "2027-12-31"
    assert "(expired 2027-12-31)" in _screen(check.client, check)


@pytest.fixture
def awaiting_release(check):
    check.ok(sign("sign-selector", "mech1"))
    check.ok(sign("sign-engine", "mech2"), client=check.mech2)
    return check


def test_a_certifier_without_an_authorisation_is_refused(awaiting_release, app, db, clock,
                                                         monkeypatch):
    authority = station_authority(app.config["DB_PATH"], "x", clock())
    enrol(db, username="super2", full_name="Ines Demo", roles=["supervisor"],
          password="long-enough-pw", authorisation="BCA-C-0099", now=clock(), pin="864208",
          authority=authority)                # invented; granted nothing to sign
    monkeypatch.setitem(DEMO_PASSWORDS, "super2", "long-enough-pw")
    monkeypatch.setitem(DEMO_PINS, "super2", "864208")
    newcomer = LoggedIn(app.test_client(), "super2")
    refusal = awaiting_release.refused(sign("certify", "super2"), "authorisation_missing",
                                       client=newcomer)
    assert refusal["reason"].startswith("No authorisation of yours covers certifying "
                                        "ATA 74-00 (functional check)")
    # The review page says why instead of offering the PIN box.
    page = newcomer.get(f"/review/{awaiting_release.id}").get_data(as_text=True)
    assert 'data-testid="certify-refused"' in page and 'data-testid="certify-form"' not in page
    assert 'data-testid="return-form"' in page        # returning the job needs no licence


def test_the_release_names_the_certifier_s_licence_on_screen_stamp_and_record(
        awaiting_release, login, db, tmp_path):
    supervisor = login("super")
    page = supervisor.get(f"/review/{awaiting_release.id}").get_data(as_text=True)
    assert 'data-testid="certify-licence">BCA-CS-0021<' in page
    assert "Company authorisation (demo) — mechanic" in page   # the performers' kind, printed
    awaiting_release.ok(sign("certify", "super"), client=supervisor)
    text = " ".join(pdf_text(signers.latest_record(db, awaiting_release.id)["pdf"],
                             tmp_path).split())
    assert "Authorisation no. BCA-CS-0021 (Certifying staff authorisation (demo))" in text
    assert "Authorisation no. BCA-CA-0147 (Company authorisation (demo) — mechanic)" in text
    assert "Certifying staff authorisation (demo)" in text


def test_a_mechanic_cannot_amend_a_certified_job(awaiting_release, login, db):
    awaiting_release.ok(sign("certify", "super"), client=login("super"))
    before = len(signers.records_of(db, awaiting_release.id))
    refusal = awaiting_release.refused(_event(
        "count-b", "amendment", field="count", new="34", why="wrong column",
        pin=DEMO_PINS["mech1"]), "amendment_role")
    assert refusal["reason"].startswith("Only a supervisor amends a certified record")
    assert len(signers.records_of(db, awaiting_release.id)) == before   # no new revision
    assert [e["kind"] for e in job_store.events(db, awaiting_release.id)].count(
        "amendment") == 0


def test_a_revoked_authorisation_stops_the_next_signature(check, login, db):
    admin = login("admin")
    mech2 = people.person_by_username(db, "mech2")
    held = db.execute("select id from authorisations where person_id = ?",
                      [mech2.id]).fetchone()[0]
    answer = admin.post_form(f"/people/{mech2.id}/authorisations/{held}/revoke", {})
    assert answer.status_code == 303
    check.ok(sign("sign-selector", "mech1"))
    check.refused(sign("sign-engine", "mech2"), "authorisation_missing", client=check.mech2)


def test_the_inspector_does_not_also_certify(login, db, clock, tmp_path):
    # No shipped procedure has both an inspection and a release; this copy of the functional
    # check makes its second line an independent inspection.
    text = (Path(__file__).resolve().parents[2] / "tasks" / "ignition-functional-check.yaml"
            ).read_text(encoding="utf-8")
    text = text.replace("id: ignition-functional-check", "id: check-with-inspection").replace(
        "text: Sign as the person at the engine who counted the snaps.\n    role: performer",
        "text: Inspect the work as a person who did none of it.\n    role: inspector")
    (tmp_path / "check-with-inspection.yaml").write_text(text, encoding="utf-8")
    assert load_shop_library(db, clock(), [tmp_path / "check-with-inspection.yaml"])
    supervisor = login("super")      # holds inspect and certify (demo)
    job = Job(login("mech1"), db, clock, "check-with-inspection", channel=None)
    job.walk_to("sign-selector")
    job.ok(sign("sign-selector", "mech1"))
    job.ok(sign("sign-engine", "super"), client=supervisor)
    refusal = job.refused(sign("certify", "super"), "certifier_is_inspector", client=supervisor)
    assert refusal["reason"].startswith("You inspected this work")
    page = supervisor.get(f"/review/{job.id}").get_data(as_text=True)
    assert 'data-testid="certify-refused"' in page and "You inspected this work" in page
