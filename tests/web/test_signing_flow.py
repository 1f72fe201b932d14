"""Signing a job: the PIN as the second component, a real PDF signature, the right people."""

from __future__ import annotations

from datetime import datetime

import pytest

from tests.conftest import DEMO_PINS
from tests.web.jobs import Job, _event, exciter_removed
from webapp.records import identity
from webapp.records.signing import sign_record, verify_record
from webapp.records.verify import check_record, revocations
from webapp.station.authority import station_authority
from webapp.store import jobs as job_store
from webapp.store import signers


@pytest.fixture
def removal(mechanic, db, clock):
    job = Job(mechanic, db, clock, "exciter-removal")
    job.walk_to("performer")
    return job


def sign(step, pin):
    return _event(step, "signed", pin=pin)


def test_wrong_pin_is_refused_and_never_stored(removal, db):
    refusal = removal.refused(sign("performer", "000000"), "wrong_pin")
    assert "PIN" in refusal["reason"]
    stored = db.execute("select data from refusals").fetchall()
    assert all("000000" not in row[0] for row in stored)  # the PIN is not kept anywhere


def test_pin_attempts_are_throttled(removal):
    for _ in range(5):
        removal.refused(sign("performer", "000000"), "wrong_pin")
    removal.refused(sign("performer", DEMO_PINS["mech1"]), "pin_throttled")


def test_performer_signs_and_the_pdf_carries_a_valid_trusted_signature(removal, db, app,
                                                                      clock):
    answer = removal.ok(sign("performer", DEMO_PINS["mech1"]))
    event = answer.get_json()
    assert event["data"]["meaning"] == "Performed"
    assert event["data"]["scope"] == "this job's work only"
    assert event["data"]["signer_name"] == "Aino Varga"
    assert "pin" not in event["data"]
    record = signers.latest_record(db, removal.id)
    assert record["signatures"] == 1 and record["chain_hash"] == event["hash"]
    authority = station_authority(app.config["DB_PATH"], "x", clock())
    reports = verify_record(record["pdf"], authority.cert)
    assert len(reports) == 1
    report = reports[0]
    assert report.intact and report.valid and report.trusted
    assert report.signer == "Aino Varga" and report.meaning.startswith("Performed")


def test_the_station_refuses_to_sign_before_the_work_is_done(mechanic, db, clock):
    job = Job(mechanic, db, clock, "exciter-removal")
    job.walk_to("removed-exciter")
    job.refused(sign("performer", DEMO_PINS["mech1"]), "out_of_order")


def test_inspector_cannot_be_the_performer(login, db, clock):
    mech1, mech2 = login("mech1"), login("mech2")
    exciter_removed(mech1, db, clock)
    job = Job(mech1, db, clock, "exciter-installation")
    job.walk_to("performer")
    job.ok(sign("performer", DEMO_PINS["mech1"]))
    job.refused(sign("inspector", DEMO_PINS["mech1"]), "inspector_is_performer")
    job.ok(sign("inspector", DEMO_PINS["mech2"]), client=mech2)
    record = signers.latest_record(db, job.id)
    assert record["signatures"] == 2
    authority = station_authority(db_path_of(db), "x", clock())
    reports = verify_record(record["pdf"], authority.cert)
    assert [r.meaning.split(" (")[0] for r in reports] == ["Performed", "Inspected"]
    assert all(r.intact and r.valid and r.trusted and not r.modified_after for r in reports)


def test_a_person_without_a_signing_key_cannot_sign(mechanic, login, db, clock, app):
    from webapp.station.accounts import enrol

    enrol(db, username="nokey", full_name="Kim Demo", roles=["mechanic"],
          password="long-enough-pw", authorisation=None, now=clock())
    from tests.conftest import DEMO_PASSWORDS
    DEMO_PASSWORDS["nokey"] = "long-enough-pw"
    try:
        other = login("nokey")
        job = Job(other, db, clock, "exciter-removal")
        job.walk_to("performer")
        job.refused(sign("performer", "123456"), "no_signing_key")
    finally:
        del DEMO_PASSWORDS["nokey"]


def db_path_of(db) -> str:
    return db.execute("PRAGMA database_list").fetchone()[2]


def test_a_revoked_person_cannot_sign_but_earlier_signatures_stay_valid(login, db, clock,
                                                                         app):
    mech1 = login("mech1")
    first = Job(mech1, db, clock, "exciter-removal")
    first.walk_to("performer")
    first.ok(sign("performer", DEMO_PINS["mech1"]))
    second = Job(mech1, db, clock, "exciter-removal", channel="B")
    second.walk_to("performer", tags=("T-3", "T-4"))
    admin = login("admin")
    person_id = next(db.query("select id from people where username = 'mech1'"))["id"]
    assert admin.post_form(f"/people/{person_id}/revoke", {}).status_code == 303
    answer = mech1.post_json(second.url, sign("performer", DEMO_PINS["mech1"]))
    assert answer.status_code in (401, 302, 409)      # logged out: the session is refused
    authority = station_authority(app.config["DB_PATH"], "x", clock())
    earlier = signers.latest_record(db, first.id)["pdf"]
    report = verify_record(earlier, authority.cert)[0]
    assert report.intact and report.valid and report.trusted   # the earlier one still holds
    assert signers.signer(db, person_id)["revoked_at"] is not None
    # The station's check says so, and says when access ended.
    revoked = revocations(signers.revoked_signers(db))
    check = check_record(earlier, authority.cert, lambda job_id: job_store.events(db, job_id),
                         lambda job_id: signers.stored_states(db, job_id),
                         revoked)
    assert check.ok, check.problems
    assert any("revoked" in n and "stays valid" in n for n in check.notes)
    # A signature made with the revoked person's key after that (the key and PIN taken
    # off the station) is reported: the station would have refused to make it.
    enrolled = signers.signer(db, person_id)
    key = identity.signer_for(identity.Enrolment(
        cert_pem=enrolled["cert_pem"], sealed=identity.SealedKey.from_json(
            enrolled["sealed_key"])), DEMO_PINS["mech1"], authority.cert)
    clock.advance(3600)
    late = sign_record(earlier, key, field_name="late", meaning="Performed",
                       signer_name="Aino Varga", signed_at=clock())
    check = check_record(late, authority.cert, lambda job_id: job_store.events(db, job_id),
                         lambda job_id: signers.stored_states(db, job_id),
                         revoked)
    assert not check.ok
    assert any("dated after Aino Varga's signing access was revoked" in p
               for p in check.problems)


def test_the_signature_states_the_station_time_of_the_signing_event(removal, db, app, clock):
    # 21 CFR 11.50(a)(2): the date and time of signing; the PDF signature and the event log
    # give the same one (the station's clock), so the record and the log agree.
    event = removal.ok(sign("performer", DEMO_PINS["mech1"])).get_json()
    authority = station_authority(app.config["DB_PATH"], "x", clock())
    report = verify_record(signers.latest_record(db, removal.id)["pdf"], authority.cert)[0]
    assert report.signed_at == datetime.fromisoformat(event["received_at"])
