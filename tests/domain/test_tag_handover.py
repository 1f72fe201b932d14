"""A lockout tag changes owner only with consent, as pure rules and through a job's events.

Sources:
- 29 CFR 1910.147(e)(3): each device is removed by the person who applied it; the exception
  is the employer's documented procedure when that person is not at the facility (verified
  in a secondary copy).
- 29 CFR 1910.147(f)(4): during shift or personnel changes the protection is transferred in
  an orderly way between off-going and oncoming employees (verified in a secondary copy).
- The incoming person re-checks the isolation before taking a tag over: common practice,
  no source.

Every tag number, person, job and time below is invented.
"""

from __future__ import annotations

from typing import Any

import pytest

from tests.domain.tag_events import (
    APPLY,
    CLERK,
    DC_ENGINE,
    FUNCTIONAL,
    HUNG,
    INCOMING,
    JOB,
    OTHER_JOB,
    OWNER,
    RELEASE,
    RELEASE_A_ONLY,
    RELEASE_OWNERS_ONLY,
    ROLES,
    SUPER,
    T0,
    THIRD,
    authorised,
    event,
    handed,
    refused,
    stamp,
    tagged,
    tags_with,
    taken,
)
from webapp.domain import gates, tag_handover
from webapp.domain.checks import Circumstances, check_event
from webapp.domain.execution import apply_event, configuration_for
from webapp.domain.execution import job_state as fold_job
from webapp.domain.procedures import Lockout

# --- the engine's tags remember consents and when a tag last changed owner ------------------

def test_a_take_over_moves_owner_and_job_and_the_owner_since_time_but_not_who_hung_it():
    tag = tags_with(handed("T-0101", INCOMING), taken("T-0101", at_s=90))["T-0101"]
    assert (tag.owner_id, tag.job_id, tag.owner_since) == (INCOMING, JOB, stamp(90))
    assert (tag.applied_by, tag.applied_at) == (OWNER, stamp(0))
    assert tag.consents == () and tag.handovers == 1   # the hand-over is used up


def test_a_hand_over_waits_on_the_tag_until_it_is_taken():
    tag = tags_with(handed("T-0101", INCOMING, at_s=60))["T-0101"]
    assert tag.owner_id == OWNER and tag.owner_since == stamp(0)
    consent = tag.consent_for(INCOMING)
    assert consent is not None and (consent.by, consent.at) == (OWNER, stamp(60))
    assert tag.consent_for(THIRD) is None


def test_the_owner_s_later_hand_over_replaces_the_earlier_one():
    tag = tags_with(handed("T-0101", INCOMING, at_s=60), handed("T-0101", THIRD, at_s=70))["T-0101"]
    assert tag.consent_for(INCOMING) is None and tag.consent_for(THIRD) is not None


def test_consents_lapse_when_the_tag_changes_owner_or_comes_off():
    tags = tags_with(handed("T-0101", INCOMING), authorised("tag_transfer_authorised", "T-0101",
                                                          to=THIRD, at_s=61),
                 taken("T-0101", at_s=90))
    assert tags["T-0101"].consent_for(THIRD) is None
    removed = tags_with(authorised("tag_removal_authorised", "T-0102"),
                    event("tag_removed", {"tag": "T-0102"}, person=INCOMING, job=JOB, at_s=80),
                    tagged("T-0102", "IGN-B", person=THIRD, job=OTHER_JOB, at_s=100))
    assert removed["T-0102"].consents == () and removed["T-0102"].owner_id == THIRD

# --- the owner hands over -----------------------------------------------------------------

def test_the_owner_hands_a_tag_to_a_mechanic_and_the_data_kept_is_clean():
    data = {"tag": " T-0101 ", "to": INCOMING, "pin": "never kept", "note": "extra"}
    assert tag_handover.check_tag_handed_over(data, tags_with(), OWNER, ROLES) == {
        "tag": "T-0101", "to": INCOMING}


def test_only_the_owner_hands_a_tag_over():
    refusal = refused(tag_handover.check_tag_handed_over, {"tag": "T-0101", "to": THIRD},
                       tags_with(), INCOMING, ROLES)
    assert refusal.rule == "not_owner"


@pytest.mark.parametrize("to", [None, SUPER, CLERK, 99, True, "mech2", OWNER],
                         ids=["none", "supervisor-only", "trainer", "unknown", "bool",
                              "unresolved-name", "the-owner"])
def test_a_tag_is_handed_only_to_another_enrolled_mechanic(to):
    refusal = refused(tag_handover.check_tag_handed_over, {"tag": "T-0101", "to": to},
                       tags_with(), OWNER, ROLES)
    assert refusal.rule == ("already_owner" if to == OWNER else "unknown_recipient")


def test_a_tag_that_does_not_hang_cannot_be_handed_over():
    assert refused(tag_handover.check_tag_handed_over, {"tag": "T-0999", "to": INCOMING},
                    tags_with(), OWNER, ROLES).rule == "tag_not_active"


# --- the incoming mechanic takes over -------------------------------------------------------

def test_take_over_without_the_owner_s_consent_is_refused():
    refusal = refused(tag_handover.check_tag_taken_over,
                       {"tag": "T-0101", "breaker_confirmed_open": True}, tags_with(), INCOMING)
    assert refusal.rule == "no_consent"
    assert "their own log-in with their PIN" in refusal.reason


def test_a_hand_over_to_someone_else_is_no_consent_for_me():
    refusal = refused(tag_handover.check_tag_taken_over,
                       {"tag": "T-0101", "breaker_confirmed_open": True},
                       tags_with(handed("T-0101", THIRD)), INCOMING)
    assert refusal.rule == "no_consent"


def test_take_over_after_the_hand_over_keeps_who_had_it_and_the_consent_used():
    tags = tags_with(handed("T-0101", INCOMING))
    kept = tag_handover.check_tag_taken_over(
        {"tag": "T-0101", "breaker_confirmed_open": True, "extra": 1}, tags, INCOMING)
    assert kept == {"tag": "T-0101", "breaker_confirmed_open": True, "from": OWNER,
                    "consent": "tag_handed_over-60"}


def test_take_over_after_a_supervisor_s_transfer_authorisation():
    tags = tags_with(authorised("tag_transfer_authorised", "T-0102", to=INCOMING))
    kept = tag_handover.check_tag_taken_over({"tag": "T-0102", "breaker_confirmed_open": True},
                                             tags, INCOMING)
    assert kept["consent"] == "tag_transfer_authorised-60" and kept["from"] == OWNER


def test_a_consent_given_by_an_earlier_owner_lapses_when_someone_else_took_the_tag():
    tags = tags_with(handed("T-0101", INCOMING), authorised("tag_transfer_authorised", "T-0101",
                                                          to=THIRD, at_s=62),
                 taken("T-0101", person=THIRD, at_s=70))
    assert refused(tag_handover.check_tag_taken_over,
                    {"tag": "T-0101", "breaker_confirmed_open": True}, tags,
                    INCOMING).rule == "no_consent"


@pytest.mark.parametrize("confirmed", [None, False, "true", 1],
                         ids=["absent", "false", "text", "one"])
def test_take_over_needs_the_breaker_re_confirmed_open_even_with_consent(confirmed):
    data: dict[str, Any] = {"tag": "T-0101"}
    if confirmed is not None:
        data["breaker_confirmed_open"] = confirmed
    refusal = refused(tag_handover.check_tag_taken_over, data,
                       tags_with(handed("T-0101", INCOMING)), INCOMING)
    assert refusal.rule == "breaker_not_confirmed" and "IGN-A" in refusal.reason


def test_take_over_refuses_the_owner_and_a_tag_that_does_not_hang():
    data = {"tag": "T-0101", "breaker_confirmed_open": True}
    assert refused(tag_handover.check_tag_taken_over, data, tags_with(),
                    OWNER).rule == "already_owner"
    assert refused(tag_handover.check_tag_taken_over, {**data, "tag": "T-0999"}, tags_with(),
                    INCOMING).rule == "tag_not_active"


# --- a supervisor authorises for an absent owner -------------------------------------------

def _transfer(data: dict[str, Any], tags=None, person: int = SUPER,
              roles: tuple[str, ...] = ("supervisor",)) -> dict[str, Any]:
    return tag_handover.check_tag_transfer_authorised(data, tags_with() if tags is None else tags,
                                                      person, roles, ROLES)


def test_a_supervisor_authorises_a_transfer_with_a_reason():
    kept = _transfer({"tag": "T-0101", "to": INCOMING, "reason": "  Left site; phoned twice "})
    assert kept == {"tag": "T-0101", "to": INCOMING, "reason": "Left site; phoned twice",
                    "owner": OWNER}


def test_a_mechanic_cannot_authorise_a_transfer():
    refusal = refused(_transfer, {"tag": "T-0101", "to": INCOMING, "reason": "gone"}, None,
                       THIRD, ("mechanic",))
    assert refusal.rule == "supervisor_only"


@pytest.mark.parametrize("reason", [None, "", "   ", 42, "x" * 501],
                         ids=["missing", "empty", "blank", "not-text", "too-long"])
def test_an_authorisation_needs_a_written_reason(reason):
    data: dict[str, Any] = {"tag": "T-0101", "to": INCOMING}
    if reason is not None:
        data["reason"] = reason
    assert refused(_transfer, data).rule == "reason_missing"


def test_a_transfer_authorisation_names_another_mechanic_once():
    data = {"tag": "T-0101", "to": SUPER, "reason": "gone"}
    assert refused(_transfer, data).rule == "unknown_recipient"
    tags = tags_with(authorised("tag_transfer_authorised", "T-0101", to=INCOMING))
    assert refused(_transfer, {**data, "to": INCOMING}, tags).rule == "already_authorised"


def test_a_supervisor_s_own_tag_is_handed_over_as_its_owner():
    tags = tags_with(tagged("T-0103", "IGN-A", person=SUPER, job=OTHER_JOB))
    assert refused(_transfer, {"tag": "T-0103", "to": INCOMING, "reason": "x"},
                    tags).rule == "own_tag"


def _removal(step: Lockout, data: dict[str, Any], tags=None,
             roles: tuple[str, ...] = ("supervisor",), job: int = JOB) -> dict[str, Any]:
    return tag_handover.check_tag_removal_authorised(step, data, tags_with() if tags is None
                                                     else tags, SUPER, roles, job)


def test_a_supervisor_authorises_an_absent_owner_removal_at_a_release_step():
    assert _removal(RELEASE, {"tag": "T-0101", "reason": "Left site", "pin": "x"}) == {
        "tag": "T-0101", "reason": "Left site", "owner": OWNER}


@pytest.mark.parametrize("step,data,rule", [
    (RELEASE_OWNERS_ONLY, {"tag": "T-0101", "reason": "x"}, "absent_owner_not_allowed"),
    (APPLY, {"tag": "T-0101", "reason": "x"}, "wrong_event_for_step"),
    (RELEASE_A_ONLY, {"tag": "T-0102", "reason": "x"}, "unknown_breaker"),
    (RELEASE, {"tag": "T-0999", "reason": "x"}, "tag_not_active"),
    (RELEASE, {"tag": "T-0101"}, "reason_missing"),
], ids=["no-absent-owner-path", "apply-step", "other-breaker", "not-hanging", "no-reason"])
def test_a_removal_authorisation_is_refused_where_the_procedure_gives_no_such_path(step, data,
                                                                                   rule):
    assert refused(_removal, step, data).rule == rule


def test_a_removal_authorisation_is_a_supervisor_s_and_given_once_per_job():
    assert refused(_removal, RELEASE, {"tag": "T-0101", "reason": "x"}, None,
                    ("mechanic",)).rule == "supervisor_only"
    tags = tags_with(authorised("tag_removal_authorised", "T-0101"))
    assert refused(_removal, RELEASE, {"tag": "T-0101", "reason": "x"},
                    tags).rule == "already_authorised"
    _removal(RELEASE, {"tag": "T-0101", "reason": "x"}, tags, job=OTHER_JOB)


# --- removal (29 CFR 1910.147(e)(3)) ------------------------------------------------------

def test_the_owner_removes_their_own_tag_and_the_new_owner_after_a_take_over():
    assert tag_handover.check_tag_removed(RELEASE_OWNERS_ONLY, {"tag": "T-0101"}, tags_with(),
                                          OWNER, JOB) == {"tag": "T-0101"}
    tags = tags_with(handed("T-0101", INCOMING), taken("T-0101"))
    tag_handover.check_tag_removed(RELEASE_OWNERS_ONLY, {"tag": "T-0101"}, tags, INCOMING, JOB)
    assert refused(tag_handover.check_tag_removed, RELEASE_OWNERS_ONLY, {"tag": "T-0101"},
                    tags, OWNER, JOB).rule == "tag_owner"


def test_someone_else_is_refused_and_told_about_the_hand_over_and_the_supervisor():
    refusal = refused(tag_handover.check_tag_removed, RELEASE, {"tag": "T-0101"}, tags_with(),
                       INCOMING, JOB)
    assert refusal.rule == "tag_owner"
    assert "take it over" in refusal.reason and "supervisor" in refusal.reason
    quiet = refused(tag_handover.check_tag_removed, RELEASE_OWNERS_ONLY, {"tag": "T-0101"},
                     tags_with(), INCOMING, JOB)
    assert "supervisor" not in quiet.reason


@pytest.mark.parametrize("absent", [
    {"reason": "Owner left site; phoned twice, no answer", "supervisor": "super"},
    {"supervisor": "super"}, {}, "owner gone", None,
], ids=["complete", "no-reason", "empty", "text", "null"])
@pytest.mark.parametrize("person", [INCOMING, OWNER], ids=["other", "owner"])
def test_a_typed_supervisor_name_is_never_an_authorisation(absent, person):
    refusal = refused(tag_handover.check_tag_removed, RELEASE,
                       {"tag": "T-0101", "absent_owner": absent}, tags_with(), person, JOB)
    assert refusal.rule == "absent_owner_typed"


def test_after_the_supervisor_s_authorisation_in_this_job_the_tag_comes_off():
    tags = tags_with(event("tag_removal_authorised", {"tag": "T-0101", "reason": "x"},
                        person=SUPER, job=JOB, at_s=60, event_id="auth-1"))
    assert tag_handover.check_tag_removed(RELEASE, {"tag": "T-0101"}, tags, INCOMING, JOB) == {
        "tag": "T-0101", "absent_owner_authorisation": "auth-1"}
    # An authorisation given in another job is not one for this job's release.
    assert refused(tag_handover.check_tag_removed, RELEASE, {"tag": "T-0101"}, tags,
                    INCOMING, OTHER_JOB).rule == "tag_owner"
    # It is for that tag only.
    assert refused(tag_handover.check_tag_removed, RELEASE, {"tag": "T-0102"}, tags,
                    INCOMING, JOB).rule == "tag_owner"


@pytest.mark.parametrize("step,data,rule", [
    (APPLY, {"tag": "T-0101"}, "wrong_event_for_step"),
    (RELEASE_A_ONLY, {"tag": "T-0102"}, "unknown_breaker"),
    (RELEASE, {"tag": "T-0999"}, "tag_not_active"),
    (RELEASE, {}, "tag_number_missing"),
], ids=["apply-step", "other-breaker", "not-hanging", "no-number"])
def test_removal_refusals_that_do_not_depend_on_who(step, data, rule):
    assert refused(tag_handover.check_tag_removed, step, data, tags_with(), OWNER,
                    JOB).rule == rule



# --- through a job: the functional check's release, and the consent kinds' place -----------

class _Engine:
    """One functional-check job on an engine whose breakers another job tagged; every
    entry is checked as the station checks it and stored with the data the check returns."""

    def __init__(self) -> None:
        configuration = configuration_for(FUNCTIONAL, "QT-610", DC_ENGINE, None)
        self.state = fold_job(FUNCTIONAL, [event("job_opened", configuration.as_data(),
                                                  person=INCOMING, job=JOB, at_s=0)])
        self.tag_events = list(HUNG)
        self.clock = 100

    def at(self, person: int) -> Circumstances:
        return Circumstances(now=T0, device_now=None, person_id=person, job_id=JOB,
                             tags=gates.engine_tags(self.tag_events), roles=ROLES[person],
                             roles_of={k: v for k, v in ROLES.items() if k != CLERK})

    def record(self, kind: str, step_id: str | None, data: dict[str, Any], person: int) -> None:
        kept = dict(check_event(self.state, kind, step_id, data, self.at(person)))
        self.clock += 1
        stored = event(kind, kept, person=person, job=JOB, at_s=self.clock, step_id=step_id)
        if kind in gates.TAG_EVENT_KINDS:
            self.tag_events.append(stored)
        self.state = apply_event(self.state, stored)

    def refused(self, kind: str, step_id: str | None, data: dict[str, Any], person: int) -> str:
        return refused(check_event, self.state, kind, step_id, data, self.at(person)).rule

    def to_release(self) -> None:
        for step_id, data in (("identify", {}), ("area-before-release", {"items": [0, 1, 2]}),
                              ("tag-owners", {})):
            kind = "acknowledged" if step_id == "tag-owners" else "step_done"
            self.record(kind, step_id, data, INCOMING)


def test_the_owner_s_consent_is_recorded_on_the_incoming_mechanic_s_job_at_any_step():
    engine = _Engine()          # at step 1: a hand-over does not wait for the release step
    assert engine.refused("tag_taken_over", None, {"tag": "T-0101",
                                                   "breaker_confirmed_open": True},
                          INCOMING) == "no_consent"
    assert engine.refused("tag_handed_over", None, {"tag": "T-0101", "to": INCOMING},
                          INCOMING) == "not_owner"
    engine.record("tag_handed_over", None, {"tag": "T-0101", "to": INCOMING}, OWNER)
    assert OWNER not in engine.state.workers   # a consent is no work on this job
    engine.record("tag_taken_over", None, {"tag": "T-0101", "breaker_confirmed_open": True},
                  INCOMING)
    engine.to_release()
    engine.record("tag_removed", "release-tags", {"tag": "T-0101"}, INCOMING)
    assert engine.refused("step_done", "release-tags", {}, INCOMING) == "tags_still_on"


def test_the_absent_owner_removal_through_the_job_needs_the_supervisor_s_own_entry():
    engine = _Engine()
    engine.to_release()
    assert engine.refused("tag_removal_authorised", "release-tags",
                          {"tag": "T-0101", "reason": "gone"}, INCOMING) == "supervisor_only"
    for tag in ("T-0101", "T-0102"):
        assert engine.refused("tag_removed", "release-tags", {"tag": tag},
                              INCOMING) == "tag_owner"
        engine.record("tag_removal_authorised", "release-tags",
                      {"tag": tag, "reason": "Left site at 17:30; phoned twice"}, SUPER)
        engine.record("tag_removed", "release-tags", {"tag": tag}, INCOMING)
    assert gates.engine_tags(engine.tag_events) == {}
    engine.record("step_done", "release-tags", {}, INCOMING)
    assert engine.state.step("release-tags").status == "done"
    # Authorising is no work on the job: the supervisor may still inspect or certify it.
    assert SUPER not in engine.state.workers


def test_a_removal_authorisation_belongs_to_the_release_step_when_the_job_is_there():
    engine = _Engine()
    assert engine.refused("tag_removal_authorised", "release-tags",
                          {"tag": "T-0101", "reason": "gone"}, SUPER) == "out_of_order"
    engine.to_release()
    assert engine.refused("tag_removal_authorised", "identify",
                          {"tag": "T-0101", "reason": "gone"}, SUPER) == "already_done"


def test_tag_moves_are_checked_with_the_engine_s_tags():
    from webapp.domain.checks import needs_engine_tags

    state = _Engine().state
    for kind in gates.CONSENT_KINDS:
        assert needs_engine_tags(state, kind, None)
