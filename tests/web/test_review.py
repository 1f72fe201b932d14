"""The supervisor's review: the queue, returning a job with a reason, certifying it."""

from __future__ import annotations

import pytest

from tests.conftest import DEMO_PINS, csrf_token_of
from tests.pdf_text import pdf_text
from tests.web.jobs import _event, functional_check_counted
from webapp.records.signing import empty_signature_fields, verify_record
from webapp.records.verify import record_id_of
from webapp.station.authority import station_authority
from webapp.store import signers


@pytest.fixture
def signed_check(login, db, clock):
    """A functional check walked and signed by two mechanics: waiting for certification.
    mech2, at the engine, counts the snaps with both channels on (a performer signs only
    work they recorded)."""
    mech1, mech2 = login("mech1"), login("mech2")
    job = functional_check_counted(mech1, mech2, db, clock)
    job.ok(_event("sign-selector", "signed", pin=DEMO_PINS["mech1"]))
    job.ok(_event("sign-engine", "signed", pin=DEMO_PINS["mech2"]), client=mech2)
    return job


def _decide(client, job_id, follow_redirects=True, **form):
    page = client.get(f"/review/{job_id}").get_data(as_text=True)
    return client.post(f"/review/{job_id}", data={**form, "csrf_token": csrf_token_of(page)},
                       follow_redirects=follow_redirects)


def test_the_queue_lists_jobs_waiting_for_certification(signed_check, login):
    html = login("super").get("/review").get_data(as_text=True)
    assert f'data-testid="review-{signed_check.id}"' in html


def test_a_mechanic_cannot_certify(signed_check):
    signed_check.refused(_event("certify", "signed", pin=DEMO_PINS["mech1"]),
                         "inspector_is_performer")


def test_certifying_closes_the_job_and_adds_the_third_signature(signed_check, login, db, app,
                                                               clock):
    supervisor = login("super").client
    answer = _decide(supervisor, signed_check.id, follow_redirects=False, action="certify",
                     pin=DEMO_PINS["super"])
    # A decision answers with a redirect, so reloading the page never sends it again.
    assert answer.status_code == 303
    assert answer.headers["Location"].endswith(f"/review/{signed_check.id}")
    answer = supervisor.get(answer.headers["Location"])
    assert answer.status_code == 200
    assert 'data-testid="certified"' in answer.get_data(as_text=True)
    assert signed_check.state()["status"] == "complete"
    # Closed: no further events.
    signed_check.refused(_event(None, "de_energised"), "job_not_open")
    # The mechanic's screen of the closed job leads to the certified record.
    page = signed_check.client.get(f"/jobs/{signed_check.id}").get_data(as_text=True)
    assert 'data-testid="job-record"' in page
    pdf = signed_check.client.get(f"/jobs/{signed_check.id}/record.pdf")
    assert pdf.status_code == 200
    assert pdf.data == signers.latest_record(db, signed_check.id)["pdf"]
    record = signers.latest_record(db, signed_check.id)
    reports = verify_record(record["pdf"], station_authority(app.config["DB_PATH"], "x",
                                                             clock()).cert)
    assert [r.meaning.split(" (")[0] for r in reports] == [
        "Performed", "Performed", "Certified for release to service"]
    assert all(r.intact and r.trusted and not r.modified_after for r in reports)


def test_a_wrong_pin_does_not_certify(signed_check, login):
    supervisor = login("super").client
    answer = _decide(supervisor, signed_check.id, action="certify", pin="999999")
    assert answer.status_code == 409
    assert signed_check.state()["status"] == "open"


def test_returning_reopens_the_signatures_and_the_next_record_is_a_new_revision(
        signed_check, login, db):
    supervisor = login("super").client
    empty = _decide(supervisor, signed_check.id, action="return", reason=" ")
    assert empty.status_code == 422
    answer = _decide(supervisor, signed_check.id, action="return",
                     reason="Channel B count taken with the GPU off: repeat it")
    assert answer.status_code == 200
    state = signed_check.state()
    assert state["next_step"] == "sign-selector"     # the work stays, the signatures reopen
    assert "count-b" in state["done"]
    first = signers.latest_record(db, signed_check.id)
    signed_check.ok(_event("sign-selector", "signed", pin=DEMO_PINS["mech1"]))
    second = signers.latest_record(db, signed_check.id)
    assert (first["revision"], second["revision"]) == (1, 2)
    assert second["supersedes"] == first["id"] and second["signatures"] == 1
    assert len(signers.records_of(db, signed_check.id)) == 3  # every state kept
    # The superseded revision can still be fetched, byte for byte, from the job's log page.
    log = supervisor.get(f"/jobs/{signed_check.id}/log").get_data(as_text=True)
    assert f"/jobs/{signed_check.id}/records/{first['id']}.pdf" in log
    fetched = supervisor.get(f"/jobs/{signed_check.id}/records/{first['id']}.pdf?download=1")
    assert fetched.status_code == 200 and fetched.data == first["pdf"]
    assert fetched.headers["Content-Disposition"].startswith("attachment;")
    assert supervisor.get(f"/jobs/{signed_check.id + 1}/records/{first['id']}.pdf"
                          ).status_code == 404      # a record is reached only under its job


def test_only_a_supervisor_returns_a_job(signed_check):
    signed_check.refused(_event(None, "returned", reason="x"), "return_role")


def test_an_amendment_after_certification_makes_a_new_revision(signed_check, login, db, app,
                                                                clock, tmp_path):
    supervisor = login("super")
    _decide(supervisor.client, signed_check.id, action="certify", pin=DEMO_PINS["super"])
    certified = signers.latest_record(db, signed_check.id)
    api = f"/api/jobs/{signed_check.id}/events"
    before = len(signers.records_of(db, signed_check.id))
    # Tied to a step and one of its recorded fields; the station takes the recorded value.
    for step, fields, status, rule in (
            (None, {"field": "count", "new": "34"}, 422, "bad_input"),        # no step
            ("count-b", {"field": "colour", "new": "34"}, 409, "no_such_field"),
            ("count-b", {"field": "count", "new": " "}, 422, "bad_input"),
            ("count-b", {"field": "count", "new": "36"}, 422, "bad_input")):  # unchanged
        bad = supervisor.post_json(api, _event(step, "amendment", why="typo",
                                               pin=DEMO_PINS["super"], **fields))
        assert (bad.status_code, bad.get_json()["rule"]) == (status, rule), bad.get_json()
    assert "its fields are: count, method, window_s" in supervisor.post_json(api, _event(
        "count-b", "amendment", field="colour", new="1", why="x",
        pin=DEMO_PINS["super"])).get_json()["reason"]
    assert len(signers.records_of(db, signed_check.id)) == before   # nothing signed
    answer = supervisor.post_json(api, _event(
        "count-b", "amendment", field="count", new="34",
        why="transcribed from the wrong column", pin=DEMO_PINS["super"]))
    assert answer.status_code == 201, answer.get_json()
    amended = signers.latest_record(db, signed_check.id)
    assert amended["revision"] == certified["revision"] + 1
    assert amended["supersedes"] == certified["id"]
    # The certified revision is kept byte for byte.
    assert signers.record(db, certified["id"])["pdf"] == certified["pdf"]
    reports = verify_record(amended["pdf"], station_authority(app.config["DB_PATH"], "x",
                                                              clock()).cert)
    assert reports[-1].meaning.startswith("Amended: step ")
    assert "(count-b), count: recorded 36, corrected to 34" in reports[-1].meaning
    import pypdf

    text = "".join(page.extract_text() for page in pypdf.PdfReader(
        __import__("io").BytesIO(amended["pdf"])).pages)
    flat = " ".join(text.split())
    assert "Amendments after certification" in flat and "wrong column" in flat
    assert f"amends revision 1, record {record_id_of(certified['pdf'])}" in flat
    # The earlier signatures are printed as given in revision 1, not as if in this file.
    assert (f"Signed in revision 1 (record {record_id_of(certified['pdf'])}), not in this "
            "file") in flat
    assert "Count the spark snaps on channel B. count 36 34 transcribed from" in flat
    # The amending signature is stamped in the amendment's box, so it shows on paper
    # (21 CFR 11.50), and the box is filled: nothing left unsigned on this revision.
    stamped = " ".join(pdf_text(amended["pdf"], tmp_path).split())
    assert "Signed electronically by Priya Halvorsen" in stamped
    assert "count: recorded 36, corrected to 34" in stamped
    assert empty_signature_fields(amended["pdf"]) == []


def test_a_return_can_ask_for_the_work_again_from_a_step(signed_check, login, db, mechanic,
                                                         tmp_path):
    supervisor = login("super").client
    wrong = _decide(supervisor, signed_check.id, action="return", reason="x",
                    repeat_from="sign-engine")
    assert wrong.status_code == 422      # a signature is not work to repeat; nothing kept
    assert signed_check.state()["next_step"] == "certify"
    answer = _decide(supervisor, signed_check.id, action="return",
                     reason="Channel B count taken with the GPU off: repeat it",
                     repeat_from="count-b")
    assert answer.status_code == 200
    state = signed_check.state()
    assert state["next_step"] == "count-b"           # the work reopens from the step named
    assert "count-a" in state["done"] and "count-both" not in state["done"]
    # The review page shows the record as its next revision will print.
    review = supervisor.get(f"/review/{signed_check.id}").get_data(as_text=True)
    assert "This is revision 2 of the record" in review
    # The mechanic is told, on the job's screen, what to do again.
    page = mechanic.client.get(f"/jobs/{signed_check.id}").get_data(as_text=True)
    assert "Channel B count taken with the GPU off" in page
    assert "Do the work again from step" in page
    # Signing before the work is done again is refused, naming the step that comes first.
    refusal = signed_check.refused(_event("sign-selector", "signed", pin=DEMO_PINS["mech1"]),
                                   "out_of_order")
    assert "Count the spark snaps on channel B" in refusal["reason"]
    # Done again, in order (energising again on channel B, the gates checked again), then
    # signed: the new revision shows the return and both channel B counts.
    signed_check.walk_to("sign-selector")
    signed_check.ok(_event("sign-selector", "signed", pin=DEMO_PINS["mech1"]))
    record = signers.latest_record(db, signed_check.id)
    assert record["revision"] == 2
    text = " ".join(pdf_text(record["pdf"], tmp_path).split())
    assert "Returned for correction" in text and "This is revision 2 of the record" in text
    assert "Channel B count taken with the GPU off: repeat it" in text
    counts_b = [r for r in signed_check.state()["readings"] if r["step"] == "count-b"]
    assert len(counts_b) == 2                         # the first count is kept, not replaced


def test_an_amendment_is_only_for_a_certified_job(signed_check, login):
    supervisor = login("super")
    answer = supervisor.post_json(f"/api/jobs/{signed_check.id}/events", _event(
        None, "amendment", field="x", new="z", why="y", pin=DEMO_PINS["super"]))
    assert answer.status_code == 409 and answer.get_json()["rule"] == "not_certified"
