"""Who may give each signature: performers did the work, each line its own person, the
inspection and the release by others, every one under an authorisation valid on the day."""

from __future__ import annotations

from dataclasses import replace
from datetime import UTC, date, datetime
from pathlib import Path

import pytest

from webapp.domain.authorisations import Authorisation
from webapp.domain.checks import Circumstances, check_event
from webapp.domain.errors import RuleRefusal
from webapp.domain.execution import configuration_for, job_state
from webapp.domain.procedure_files import parse_procedure
from webapp.domain.procedures import Sign
from webapp.domain.signoff import amendable_fields, check_signature, signature_refusal

TASKS = Path(__file__).resolve().parents[2] / "tasks"
CHECK_TEXT = (TASKS / "ignition-functional-check.yaml").read_text(encoding="utf-8")
# The functional check: two performer lines (selector, engine), then the release to service.
CHECK = parse_procedure(CHECK_TEXT)
# The same check with an independent inspection in place of the second performer line, so one
# procedure has all three kinds of signature.
INSPECTED = parse_procedure(CHECK_TEXT.replace(
    "text: Sign as the person at the engine who counted the snaps.\n    role: performer",
    "text: Inspect the work as a person who did none of it.\n    role: inspector"))
ENGINE = [{"kind": "exciter", "type": "dc", "channel": c} for c in "AB"] + [
    {"kind": "plug", "type": "surface-discharge", "channel": c} for c in "AB"]
NOW = datetime(2026, 12, 1, 8, 0, tzinfo=UTC)
MECH1, MECH2, SUPER = 1, 2, 3


def grant(*signatures, scope=("74",), expires_on=date(2027, 12, 31), number="DEMO-CA-1"
          ) -> Authorisation:
    return Authorisation(id=len(number), person_id=0, signatures=signatures, scope=scope,
                         licence_kind="Company authorisation (demo)", licence_number=number,
                         expires_on=expires_on)


PERFORM, INSPECT, CERTIFY = grant("perform"), grant("inspect"), grant("certify", number="CS-9")


def at_signatures(procedure=CHECK, workers=(MECH1,), signed=None):
    """The job with all its work recorded (by MECH1 unless said), and `signed`: step id ->
    (person, role) for signatures given."""
    state = job_state(procedure, [{"kind": "job_opened", "step_id": None, "data":
                                   configuration_for(procedure, "QT-610", ENGINE,
                                                     None).as_data()}])
    completed = {s.id: {"kind": "step_done", "person_id": MECH1, "data": {}}
                 for s in state.applicable if not isinstance(s, Sign)}
    for step_id, (person, role) in (signed or {}).items():
        completed[step_id] = {"kind": "signed", "person_id": person, "data": {"role": role}}
    return replace(state, completed=completed, workers=frozenset(workers))


def sign(state, step_id, person, roles=("mechanic",), held=(PERFORM,), now=NOW):
    """The sign-off rule alone (a release's statement about the engine is added after it by
    the execution rules, tested with the engine)."""
    at = Circumstances(now=now, device_now=None, person_id=person, job_id=1, roles=roles,
                       authorisations=tuple(held))
    assert state.next_step.id == step_id
    return check_signature(state, state.step(step_id), at)


def refused(state, step_id, person, **kw) -> RuleRefusal:
    with pytest.raises(RuleRefusal) as refusal:
        sign(state, step_id, person, **kw)
    return refusal.value


def test_a_performer_who_did_the_work_signs_under_the_authorisation_it_names():
    data = sign(at_signatures(), "sign-selector", MECH1)
    assert data == {"role": "performer", "meaning": "Performed",
                    "scope": "this job's work only", "authorisation": "DEMO-CA-1",
                    "licence_kind": "Company authorisation (demo)",
                    "authorisation_id": PERFORM.id}


def test_a_supervisor_who_did_no_work_cannot_sign_as_performer():
    refusal = refused(at_signatures(), "sign-selector", SUPER, roles=("supervisor",),
                      held=(PERFORM, CERTIFY))
    assert refusal.rule == "performer_did_no_work"
    assert refusal.reason.startswith("You recorded no work on this job")


def test_one_person_signs_one_performer_line_only():
    state = at_signatures(workers=(MECH1, MECH2),
                          signed={"sign-selector": (MECH1, "performer")})
    refusal = refused(state, "sign-engine", MECH1)
    assert refusal.rule == "performer_signs_once"
    assert "already signed step" in refusal.reason
    assert sign(state, "sign-engine", MECH2)["role"] == "performer"


def test_a_performer_needs_the_perform_authorisation():
    refusal = refused(at_signatures(), "sign-selector", MECH1, held=(INSPECT,))
    assert refusal.rule == "authorisation_missing"
    assert "performing ATA 74-00 (functional check)" in refusal.reason


@pytest.mark.parametrize("signed_as_performer", [True, False])
def test_an_inspector_did_none_of_the_work(signed_as_performer):
    signed = {"sign-selector": (MECH1, "performer")}
    state = at_signatures(INSPECTED, workers=(MECH1, MECH2) if not signed_as_performer
                          else (MECH1,), signed=signed)
    who = MECH1 if signed_as_performer else MECH2   # MECH2 recorded work but did not sign
    refusal = refused(state, "sign-engine", who, held=(PERFORM, INSPECT))
    assert refusal.rule == "inspector_is_performer"
    assert refusal.reason == "You performed this work: another person inspects it."


def test_an_independent_inspector_needs_the_inspect_authorisation():
    state = at_signatures(INSPECTED, signed={"sign-selector": (MECH1, "performer")})
    assert refused(state, "sign-engine", MECH2).rule == "authorisation_missing"
    assert sign(state, "sign-engine", MECH2, held=(PERFORM, INSPECT))["meaning"] == "Inspected"


def _inspected():
    return at_signatures(INSPECTED, signed={"sign-selector": (MECH1, "performer"),
                                            "sign-engine": (MECH2, "inspector")})


def test_the_certifier_neither_performed_nor_inspected():
    state = _inspected()
    performed = refused(state, "certify", MECH1, roles=("mechanic", "supervisor"),
                        held=(CERTIFY,))
    assert performed.rule == "inspector_is_performer"
    assert performed.reason == "You performed this work: another person certifies it."
    inspected = refused(state, "certify", MECH2, roles=("mechanic", "supervisor"),
                        held=(CERTIFY,))
    assert inspected.rule == "certifier_is_inspector"
    data = sign(state, "certify", SUPER, roles=("supervisor",), held=(CERTIFY,))
    assert (data["authorisation"], data["meaning"]) == ("CS-9", "Certified for release to "
                                                                "service")


def test_the_certifier_is_a_supervisor_even_with_a_certify_authorisation():
    assert refused(_inspected(), "certify", SUPER, roles=("mechanic",),
                   held=(CERTIFY,)).rule == "certifier_role"


def test_a_certifier_without_a_valid_authorisation_is_refused_and_told_why():
    state = _inspected()
    none = refused(state, "certify", SUPER, roles=("supervisor",), held=(INSPECT,))
    assert none.rule == "authorisation_missing"
    lapsed = grant("certify", expires_on=date(2026, 1, 31))
    expired = refused(state, "certify", SUPER, roles=("supervisor",), held=(lapsed,))
    assert expired.rule == "authorisation_expired"
    assert expired.reason.startswith("No authorisation of yours covers certifying ATA 74-00 "
                                     "(functional check) (expired 2026-01-31)")
    section = grant("certify", scope=("74-10",))       # another section of the chapter
    assert refused(state, "certify", SUPER, roles=("supervisor",),
                   held=(section,)).rule == "authorisation_missing"
    by_kind = grant("certify", scope=("functional check",))
    assert sign(state, "certify", SUPER, roles=("supervisor",), held=(by_kind,))


def test_the_authorisation_is_judged_on_the_day_of_signing():
    last_day = grant("perform", expires_on=date(2026, 12, 1))
    assert sign(at_signatures(), "sign-selector", MECH1, held=(last_day,))
    next_day = datetime(2026, 12, 2, 0, 0, tzinfo=UTC)
    assert refused(at_signatures(), "sign-selector", MECH1, held=(last_day,),
                   now=next_day).rule == "authorisation_expired"


def test_the_screens_ask_the_same_rule():
    state = at_signatures(workers=(MECH1, MECH2),
                          signed={"sign-selector": (MECH1, "performer")})
    target = state.step("sign-engine")
    assert signature_refusal(state, target, MECH2, ("mechanic",), (PERFORM,),
                             NOW.date()) is None
    assert "already signed step" in signature_refusal(state, target, MECH1, ("mechanic",),
                                                      (PERFORM,), NOW.date())
    assert signature_refusal(state, target, SUPER, ("supervisor",), (CERTIFY,),
                             NOW.date()).startswith("You recorded no work")
    unfinished = replace(state, completed={k: v for k, v in state.completed.items()
                                           if k != "check-fuel"})
    assert signature_refusal(unfinished, target, MECH2, ("mechanic",), (PERFORM,),
                             NOW.date()).startswith("Not ready to sign")
    assert signature_refusal(state, state.step("identify"), MECH2, ("mechanic",), (),
                             NOW.date()) is None     # not a sign step: nothing to say


def test_only_a_supervisor_amends_a_certified_record():
    state = at_signatures(signed={"sign-selector": (MECH1, "performer"),
                                  "sign-engine": (MECH2, "performer"),
                                  "certify": (SUPER, "certifying")})
    assert state.status == "complete"
    # A count of channel B as recorded (demo values): what the station keeps of it.
    step = state.step("count-b")
    state = replace(state, readings=(*state.readings, {
        "step": "count-b", "kind": "spark_count", "attempt": 1, "method": "timed",
        "count": 36, "window_s": 30.0, "rate": 72.0, "verdict": "within", "channel": "B"}))
    recorded = amendable_fields(state, step.id)
    assert recorded == {"method": "timed", "count": 36, "window_s": 30.0}   # entered only

    def amend(roles, field="count", new="34"):
        return check_event(state, "amendment", step.id,
                           {"field": field, "new": new, "why": "wrong column"},
                           Circumstances(now=NOW, device_now=None, person_id=MECH1, job_id=1,
                                         roles=roles))

    with pytest.raises(RuleRefusal) as refusal:
        amend(("mechanic",))
    assert refusal.value.rule == "amendment_role"
    stored = amend(("supervisor",))
    assert stored["meaning"] == "Amended" and stored["step"] == step.id
    assert stored["old"] == recorded[stored["field"]]     # taken from the log, not typed
    with pytest.raises(RuleRefusal) as refusal:
        amend(("supervisor",), field="no-such-field")
    assert refusal.value.rule == "no_such_field"


def test_the_people_who_recorded_work_are_folded_from_the_log():
    opened = {"kind": "job_opened", "step_id": None, "person_id": 9, "data":
              configuration_for(CHECK, "QT-610", ENGINE, None).as_data()}

    def event(kind, step_id, person):
        return {"kind": kind, "step_id": step_id, "person_id": person, "data": {},
                "received_at": "2026-12-01T08:00:00+00:00", "device_time": None}

    state = job_state(CHECK, [opened, event("step_done", "identify", MECH1),
                              event("step_done", "area-before-release", MECH2),
                              event("signed", "sign-selector", 4),
                              event("returned", None, 5), event("amendment", None, 6)])
    assert state.workers == {MECH1, MECH2}   # not the opener, signers, returns, amendments
