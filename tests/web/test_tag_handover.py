"""A lockout tag changes owner only with consent, tried through the JSON API and the step
screen as the people involved (and as someone who should not) would.

mech1 (Aino Varga) tags the engine's ignition breakers in an exciter removal and leaves that
job open; mech2 (Tomas Reyes) does the functional check on the same engine; super (Priya
Halvorsen) is the supervisor. Tags, reasons and times are invented.

Sources:
- 29 CFR 1910.147(e)(3): each device removed by the person who applied it, or under the
  employer's documented procedure when that person is not at the facility (verified in a
  secondary copy).
- 29 CFR 1910.147(f)(4): the orderly transfer of the protection between off-going and
  oncoming employees (verified in a secondary copy).
"""

from __future__ import annotations

import io
from datetime import timedelta

import pytest
from pypdf import PdfReader

from tests.conftest import DEMO_PINS
from tests.web.jobs import DEMO_101_ENGINE_1, Job, _event
from webapp.records import pdf
from webapp.station import recording
from webapp.store import jobs as job_store
from webapp.store import people, signers

PIN_LOCK = timedelta(minutes=10)  # the station's own throttle window (house rule, no source)


@pytest.fixture
def engine(mechanic, login, db, clock):
    """mech1's removal job, tags T-1 on IGN-A and T-2 on IGN-B, left open; mech2's functional
    check on the same engine, at its release step."""
    removal = Job(mechanic, db, clock, "exciter-removal")
    removal.walk_to("input-first")
    reyes = login("mech2")
    check = Job(reyes, db, clock, "ignition-functional-check", channel=None)
    check.walk_to("release-tags")
    ids = {u: people.person_by_username(db, u).id for u in ("mech1", "mech2", "super")}
    return removal, check, mechanic, reyes, ids


def _owners(db):
    return {n: t.owner_id for n, t in recording.engine_tags(db, DEMO_101_ENGINE_1).items()}


def _hand_over(tag, to="mech2", pin=DEMO_PINS["mech1"]):
    return _event(None, "tag_handed_over", tag=tag, to=to, pin=pin)


def _take(tag, **data):
    return _event(None, "tag_taken_over", tag=tag, breaker_confirmed_open=True, **data)


def _record_text(app, db, job_id, now):
    with app.app_context():
        data, _ = pdf.render_for_signing(db, job_id, now, [])
    return " ".join(" ".join(p.extract_text() for p in PdfReader(io.BytesIO(data)).pages)
                    .split())


# --- the attack: another mechanic takes the tag without its owner ------------------------

def test_another_mechanic_cannot_take_over_remove_and_energise_without_the_owner(engine, db):
    removal, check, _aino, _reyes, ids = engine
    assert job_store.job(db, removal.id)["status"] == "open"
    check.refused(_take("T-1"), "no_consent")
    # A consent made up in the entry itself counts for nothing: fields the station derives
    # are not the entry's to send (refused by the entry's shape, nothing stored).
    before = len(job_store.events(db, check.id))
    forged = check.post(_take("T-1", consent="tag_handed_over-1", **{"from": ids["mech1"]}))
    assert forged.status_code == 422, forged.get_json()
    assert forged.get_json()["problems"][0]["field"] in ("data.consent", "data.from")
    assert len(job_store.events(db, check.id)) == before
    check.refused(_event("release-tags", "tag_removed", tag="T-1"), "tag_owner")
    check.refused(_event("release-tags"), "tags_still_on")
    check.refused(_event("run-a-dc", "energised"), "pre_energising_gate")
    # Nor can mech2 hand it to themselves, or authorise it as if a supervisor.
    check.refused(_hand_over("T-1", pin=DEMO_PINS["mech2"]), "not_owner")
    check.refused(_event(None, "tag_transfer_authorised", tag="T-1", to="mech2",
                         reason="owner gone", pin=DEMO_PINS["mech2"]), "supervisor_only")
    check.refused(_event("release-tags", "tag_removal_authorised", tag="T-1",
                         reason="owner gone", pin=DEMO_PINS["mech2"]), "supervisor_only")
    assert _owners(db) == {"T-1": ids["mech1"], "T-2": ids["mech1"]}


def test_someone_else_s_pin_on_your_own_session_is_a_wrong_pin_counted_against_you(engine, db,
                                                                                     clock):
    _removal, check, _aino, _reyes, ids = engine
    refusal = check.refused(_hand_over("T-1"), "wrong_pin")   # mech2's session, mech1's PIN
    assert "PIN" in refusal["reason"]
    since = clock() - PIN_LOCK
    assert signers.pin_failures_since(db, ids["mech2"], since) == 1
    assert signers.pin_failures_since(db, ids["mech1"], since) == 0


def test_a_typed_supervisor_name_is_refused_and_nothing_is_stored(engine, db):
    _removal, check, _aino, _reyes, ids = engine
    for absent in ({"reason": "left site at 18:00, phoned twice", "supervisor": "super"},
                   {"supervisor": "super"}):
        check.refused(_event("release-tags", "tag_removed", tag="T-2", absent_owner=absent),
                      "absent_owner_typed")
    assert _owners(db)["T-2"] == ids["mech1"]


# --- the owner's consent, on the owner's session, with the owner's PIN ------------------

def test_with_the_owner_s_consent_the_tags_move_come_off_and_the_engine_is_energised(
        engine, db, clock, app):
    _removal, check, aino, _reyes, ids = engine
    check.ok(_hand_over("T-1"), aino)                       # by username
    check.ok(_hand_over("T-2", to=ids["mech2"]), aino)      # by person id
    stored = job_store.events(db, check.id)[-1]
    assert stored["person_id"] == ids["mech1"]
    assert stored["data"] == {"tag": "T-2", "to": ids["mech2"]}      # no PIN kept
    assert _owners(db) == {"T-1": ids["mech1"], "T-2": ids["mech1"]}  # not moved yet
    clock.advance(60)
    for tag in ("T-1", "T-2"):
        check.ok(_take(tag))
        check.ok(_event("release-tags", "tag_removed", tag=tag))
    assert _owners(db) == {}
    check.walk_to("run-a-dc")
    check.ok(_event("run-a-dc", "energised"))
    text = _record_text(app, db, check.id, clock())
    assert "consented by the owner, Aino Varga" in text
    assert "handed over from Aino Varga, BCA-M-0147 to Tomas Reyes, BCA-M-0152" in text


def test_a_tag_is_handed_only_to_an_enrolled_mechanic_who_alone_takes_it(engine, login):
    _removal, check, aino, _reyes, _ids = engine
    check.refused(_hand_over("T-1", to="super"), "unknown_recipient", aino)
    check.refused(_hand_over("T-1", to="nobody"), "unknown_recipient", aino)
    check.ok(_hand_over("T-1"), aino)
    # A supervisor who is no mechanic does not take tags over: the room refuses the work.
    assert check.post(_take("T-1"), login("super")).status_code == 403


def test_a_wrong_pin_is_refused_counted_and_throttled_like_a_signature(engine, db, clock):
    _removal, check, aino, _reyes, ids = engine
    for _ in range(recording.PIN_MAX_FAILURES):
        check.refused(_hand_over("T-1", pin="000000"), "wrong_pin", aino)
    since = clock() - PIN_LOCK
    assert signers.pin_failures_since(db, ids["mech1"], since) == recording.PIN_MAX_FAILURES
    check.refused(_hand_over("T-1"), "pin_throttled", aino)       # even the right one
    assert all("pin" not in r["data"] for r in job_store.refusals(db, check.id))
    clock.advance(PIN_LOCK.total_seconds() + 1)
    check.ok(_hand_over("T-1"), aino)
    assert signers.pin_failures_since(db, ids["mech1"], clock() - PIN_LOCK) == 0


# --- a supervisor's authorisation for an absent owner, on the supervisor's own session -----

def test_a_supervisor_authorises_on_their_own_session_and_the_record_says_who_and_why(
        engine, login, db, clock, app):
    _removal, check, _aino, _reyes, ids = engine
    priya = login("super")
    transfer = "Aino Varga left site at 17:30; phoned twice, no answer"
    removal = "Aino Varga off shift until Monday; phoned twice; breaker checked in person"
    check.refused(_event(None, "tag_transfer_authorised", tag="T-1", to="mech2",
                         reason=transfer, pin="000000"), "wrong_pin", priya)
    check.refused(_event(None, "tag_transfer_authorised", tag="T-1", to="mech2",
                         reason="  ", pin=DEMO_PINS["super"]), "reason_missing", priya)
    check.ok(_event(None, "tag_transfer_authorised", tag="T-1", to="mech2", reason=transfer,
                    pin=DEMO_PINS["super"]), priya)
    check.ok(_take("T-1"))
    check.ok(_event("release-tags", "tag_removed", tag="T-1"))
    check.refused(_event("release-tags", "tag_removed", tag="T-2"), "tag_owner")
    check.ok(_event("release-tags", "tag_removal_authorised", tag="T-2", reason=removal,
                    pin=DEMO_PINS["super"]), priya)
    authorisation = job_store.events(db, check.id)[-1]
    assert authorisation["person_id"] == ids["super"]
    assert authorisation["data"] == {"tag": "T-2", "reason": removal, "owner": ids["mech1"]}
    check.ok(_event("release-tags", "tag_removed", tag="T-2"))
    check.ok(_event("release-tags"))
    text = _record_text(app, db, check.id, clock())
    assert ("authorised by Priya Halvorsen (BCA-C-0021) (supervisor, owner absent) with PIN"
            in text)
    assert transfer in text and removal in text
    assert "removed (absent owner)" in text and "removal authorised (absent owner)" in text


def test_the_authorisation_fits_only_its_job_tag_and_step(engine, login, db, clock):
    removal_job, check, aino, _reyes, _ids = engine
    priya = login("super")
    reason = "Owner left site; phoned twice"
    # Not before the job is at its release step, and not for a step without the path.
    removal_job.refused(_event("breakers", "tag_removal_authorised", tag="T-1", reason=reason,
                               pin=DEMO_PINS["super"]), "already_done", priya)
    check.ok(_event("release-tags", "tag_removal_authorised", tag="T-1", reason=reason,
                    pin=DEMO_PINS["super"]), priya)
    check.refused(_event("release-tags", "tag_removal_authorised", tag="T-1", reason=reason,
                         pin=DEMO_PINS["super"]), "already_authorised", priya)
    check.refused(_event("release-tags", "tag_removed", tag="T-2"), "tag_owner")
    # The owner may still remove their own tag themselves.
    check.ok(_event("release-tags", "tag_removed", tag="T-1"), aino)


# --- the held-breakers step confirms tags found hanging ----------------------------------

def test_the_held_breakers_step_confirms_the_tags_found_and_the_owner_stays(mechanic, login,
                                                                           db, clock):
    removal = Job(mechanic, db, clock, "exciter-removal")
    removal.walk_to("input-first")
    owner = people.person_by_username(db, "mech1").id
    reyes = login("mech2")
    other_removal = Job(reyes, db, clock, "exciter-removal", channel="B")
    other_removal.walk_to("breakers")
    other_removal.refused(_event("breakers", "breaker_tagged", breaker="IGN-A", tag="T-1"),
                          "tag_in_use")                  # an ordinary apply step still refuses
    install = Job(reyes, db, clock, "exciter-installation")
    install.walk_to("breakers-held")
    install.refused(_event("breakers-held", "breaker_tagged", breaker="IGN-A", tag="T-7"),
                    "tag_not_found")
    install.refused(_event("breakers-held"), "lockout_incomplete")
    for breaker, tag in (("IGN-A", "T-1"), ("IGN-B", "T-2")):
        install.ok(_event("breakers-held", "breaker_tagged", breaker=breaker, tag=tag))
    stored = job_store.events(db, install.id)[-1]["data"]
    assert stored == {"breaker": "IGN-B", "tag": "T-2", "confirmed_existing": True,
                      "owner": owner}
    install.ok(_event("breakers-held"))
    assert _owners(db) == {"T-1": owner, "T-2": owner}


# --- the screen offers each person what is theirs to do -----------------------------------

def _page(client, job_id):
    return client.get(f"/jobs/{job_id}").get_data(as_text=True)


def test_the_screen_offers_hand_over_take_over_and_authorise_to_the_right_people(engine, login,
                                                                                 db, clock):
    _removal, check, aino, reyes, ids = engine
    priya = login("super")
    owner_page, incoming_page = _page(aino, check.id), _page(reyes, check.id)
    assert 'data-testid="hand-over-T-1"' in owner_page and 'name="pin"' in owner_page
    assert f'<option value="{ids["mech2"]}">Tomas Reyes</option>' in owner_page
    assert 'data-testid="take-over-T-1"' not in incoming_page
    assert 'data-testid="no-consent-T-1"' in incoming_page
    assert 'data-testid="hand-over-T-1"' not in incoming_page
    supervisor_page = _page(priya, check.id)
    assert 'data-testid="authorise-transfer-T-1"' in supervisor_page
    assert 'data-testid="authorise-removal-T-2"' in supervisor_page
    assert 'data-testid="authorise-removal-T-2"' not in incoming_page

    clock.advance(3600)   # the hand-over an hour after the tag was hung (08:00 demo clock)
    form = {"kind": "tag_handed_over", "event_id": "5d0c7c6e-8f1e-4f57-9d43-6c0b1b1f7a10",
            "tag": "T-1", "to": str(ids["mech2"]), "pin": DEMO_PINS["mech1"]}
    assert aino.post_form(f"/jobs/{check.id}/events", form).status_code == 303
    assert 'data-testid="take-over-T-1"' in _page(reyes, check.id)
    taken = {"kind": "tag_taken_over", "event_id": "0f5a3c1e-2b4d-4e6f-8a9b-1c2d3e4f5a6b",
             "tag": "T-1", "breaker_confirmed_open": "1"}
    assert reyes.post_form(f"/jobs/{check.id}/events", taken).status_code == 303
    listed = _page(reyes, check.id)
    assert "Tomas Reyes, owner since 2026-12-01 09:00 UTC" in listed
    assert "Aino Varga, hung 2026-12-01 08:" in listed     # T-2 is still Aino's


def test_a_wrong_pin_in_the_hand_over_form_is_answered_on_the_page(engine, db):
    _removal, check, aino, _reyes, ids = engine
    form = {"kind": "tag_handed_over", "event_id": "7b1e2d3c-4a5b-4c6d-8e7f-9a0b1c2d3e4f",
            "tag": "T-1", "to": str(ids["mech2"]), "pin": "000000"}
    answer = aino.post_form(f"/jobs/{check.id}/events", form)
    assert answer.status_code == 409
    page = answer.get_data(as_text=True)
    assert "That PIN does not unlock your signing key." in page and "000000" not in page
