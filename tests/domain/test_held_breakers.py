"""The held-breakers step: writing the number of a tag found hanging confirms it (its owner
stays its owner) instead of being refused as a number in use; the step is met when every
breaker has a tag confirmed (or hung) in this job.

After a shift or personnel change the incoming person re-verifies that the isolation is
still in place: 29 CFR 1910.147(f)(4) (verified in a secondary copy); writing the number
read on the tag as that check is common practice, no source. Every value is invented.
"""

from __future__ import annotations

import pytest
from pydantic import ValidationError

from tests.domain.tag_events import (
    APPLY,
    CONFIRM,
    DC_ENGINE,
    HUNG,
    INCOMING,
    INSTALLATION,
    JOB,
    OTHER_JOB,
    OWNER,
    OWNER_JOB,
    RELEASE,
    T0,
    event,
    refused,
    replace_data,
    tags_with,
)
from webapp.domain import gates
from webapp.domain.checks import Circumstances, check_event
from webapp.domain.execution import apply_event, configuration_for
from webapp.domain.execution import job_state as fold_job
from webapp.domain.procedures import Lockout


def test_a_confirmation_marks_the_job_on_the_tag_and_never_creates_one():
    found = event("breaker_tagged", {"tag": "T-0101", "breaker": "IGN-A",
                                      "confirmed_existing": True, "owner": OWNER},
                   person=INCOMING, job=JOB, at_s=30)
    tags = tags_with(found)
    assert tags["T-0101"].confirmed_in == frozenset({JOB})
    assert tags["T-0101"].owner_id == OWNER and tags["T-0101"].job_id == OWNER_JOB
    ghost = replace_data(found, tag="T-0999")
    assert "T-0999" not in tags_with(ghost)



# --- the held-breakers step: tags found hanging are confirmed, not refused ---------------

def test_a_confirm_step_confirms_a_hanging_tag_and_records_its_owner():
    kept = gates.check_breaker_tagged(CONFIRM, {"breaker": "IGN-A", "tag": " T-0101 "},
                                      tags_with(), JOB)
    assert kept == {"breaker": "IGN-A", "tag": "T-0101", "confirmed_existing": True,
                    "owner": OWNER}


def test_an_ordinary_apply_step_still_refuses_a_number_in_use():
    assert refused(gates.check_breaker_tagged, APPLY, {"breaker": "IGN-A", "tag": "T-0101"},
                    tags_with(), JOB).rule == "tag_in_use"


def test_a_confirmation_must_match_what_hangs_on_that_breaker():
    tags = tags_with()
    assert refused(gates.check_breaker_tagged, CONFIRM, {"breaker": "IGN-B", "tag": "T-0101"},
                    tags, JOB).rule == "tag_elsewhere"
    misread = refused(gates.check_breaker_tagged, CONFIRM,
                       {"breaker": "IGN-A", "tag": "T-0110"}, tags, JOB)
    assert misread.rule == "tag_not_found" and "T-0101" in misread.reason
    confirmed = gates.engine_tags([*HUNG, event(
        "breaker_tagged", {"tag": "T-0101", "breaker": "IGN-A", "confirmed_existing": True},
        person=INCOMING, job=JOB, at_s=30)])
    assert refused(gates.check_breaker_tagged, CONFIRM, {"breaker": "IGN-A", "tag": "T-0101"},
                    confirmed, JOB).rule == "already_confirmed"


def test_a_confirm_step_hangs_a_new_tag_on_a_breaker_found_without_one():
    only_a = gates.engine_tags(HUNG[:1])
    assert gates.check_breaker_tagged(CONFIRM, {"breaker": "IGN-B", "tag": "T-0201"}, only_a,
                                      JOB) == {"breaker": "IGN-B", "tag": "T-0201"}


def test_the_confirm_step_is_met_by_tags_confirmed_in_this_job_only():
    confirm_a = event("breaker_tagged", {"tag": "T-0101", "breaker": "IGN-A",
                                          "confirmed_existing": True}, person=INCOMING,
                       job=JOB, at_s=30)
    tags = tags_with(confirm_a)
    assert gates.lockout_complete(CONFIRM, tags, JOB) == ["IGN-B"]
    assert gates.lockout_complete(CONFIRM, tags, OTHER_JOB) == ["IGN-A", "IGN-B"]
    both = tags_with(confirm_a, replace_data(confirm_a, tag="T-0102", breaker="IGN-B"))
    assert gates.lockout_complete(CONFIRM, both, JOB) == []


def test_confirm_existing_belongs_on_an_apply_step():
    with pytest.raises(ValidationError, match="confirm_existing"):
        RELEASE.model_validate({**RELEASE.model_dump(), "confirm_existing": True})
    held = next(s for s in INSTALLATION.steps if s.id == "breakers-held")
    assert isinstance(held, Lockout) and held.confirm_existing



def test_the_installation_s_held_breakers_step_completes_by_confirming_the_removal_s_tags():
    configuration = configuration_for(INSTALLATION, "QT-610", DC_ENGINE, "A")
    state = fold_job(INSTALLATION, [event("job_opened", configuration.as_data(),
                                           person=INCOMING, job=JOB, at_s=0)])
    tag_events = list(HUNG)
    for step_id, kind in (("identify", "step_done"), ("lethal-energy-breakers", "acknowledged")):
        state = apply_event(state, event(kind, {}, person=INCOMING, job=JOB, at_s=1,
                                          step_id=step_id))
    assert state.next_step.id == "breakers-held"

    def at() -> Circumstances:
        return Circumstances(now=T0, device_now=None, person_id=INCOMING, job_id=JOB,
                             tags=gates.engine_tags(tag_events))

    for tag, breaker in (("T-0101", "IGN-A"), ("T-0102", "IGN-B")):
        done = refused(check_event, state, "step_done", "breakers-held", {}, at())
        assert done.rule == "lockout_incomplete" and "Write the number" in done.reason
        kept = check_event(state, "breaker_tagged", "breakers-held",
                           {"tag": tag, "breaker": breaker}, at())
        tag_events.append(event("breaker_tagged", dict(kept), person=INCOMING, job=JOB,
                                 at_s=2, step_id="breakers-held"))
    check_event(state, "step_done", "breakers-held", {}, at())
    tags = gates.engine_tags(tag_events)
    assert {t.owner_id for t in tags.values()} == {OWNER}   # the owner stays the owner
    assert all(t.job_id == OWNER_JOB for t in tags.values())
