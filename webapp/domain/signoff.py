"""Sign-off: signatures, returns and amendments, and who may give each.

The rules a signature, a supervisor's return and an amendment after certification must
pass, on top of the job's order of work (checked in `execution`). Pure: plain values in,
a RuleRefusal or InputProblem out.

Who signs what: a performer line only by someone who recorded work on the job, each line
by a different person; the inspection by someone who did none of the work; the release to
service by a supervisor who neither did the work nor inspected it. Every signature rests
on an authorisation that covers its kind and the procedure, valid on the day.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from datetime import date
from typing import TYPE_CHECKING, Any

from . import readings
from .authorisations import Authorisation, authorisation_for
from .errors import RuleRefusal
from .procedures import Sign

if TYPE_CHECKING:
    from .checks import Circumstances
    from .execution import JobState, StepProgress

# What each signature means (21 CFR 11.50(a)(3)); its scope is always this job's work only.
SIGNATURE_MEANINGS = {"performer": "Performed", "inspector": "Inspected",
                      "certifying": "Certified for release to service"}
SIGNATURE_SCOPE = "this job's work only"


def _is_sign(state: JobState, step_id: str) -> bool:
    found = state.step(step_id)
    return found is not None and isinstance(found.step, Sign)


def check_amendment(state: JobState, step_id: str | None, data: Mapping[str, Any],
                    at: Circumstances) -> dict[str, Any]:
    """A correction after certification, by a supervisor: who (the event's person), why and
    what; it makes a new record revision and never overwrites the earlier one."""
    if state.status != "complete":
        raise RuleRefusal("not_certified", "Amendments are for certified jobs; while a job is "
                          "open its steps are corrected by recording them again.")
    if "supervisor" not in at.roles:
        raise RuleRefusal("amendment_role", "Only a supervisor amends a certified record: "
                          "tell a supervisor what needs correcting and why.")
    if step_id is not None and step_id not in state.positions:
        raise RuleRefusal("unknown_step", f"Step '{step_id}' is not part of this job.")
    stored: dict[str, Any] = {}
    for name, asked in (("what", "Say what is corrected."), ("why", "Say why.")):
        value = data.get(name)
        if not isinstance(value, str) or not value.strip():
            raise readings.InputProblem(name, asked)
        stored[name] = value.strip()
    return {**stored, "meaning": "Amended"}


def check_return(state: JobState, data: Mapping[str, Any], at: Circumstances
                  ) -> dict[str, Any]:
    if "supervisor" not in at.roles:
        raise RuleRefusal("return_role", "Only a supervisor returns a job to the mechanic.")
    if not any(_is_sign(state, k) for k in state.completed):
        raise RuleRefusal("nothing_to_return", "Nothing has been signed on this job yet.")
    reason = data.get("reason")
    if not isinstance(reason, str) or not reason.strip():
        raise readings.InputProblem("reason", "Say why the job goes back, so the mechanic "
                                    "knows what to put right.")
    repeat_from = data.get("repeat_from") or None
    if repeat_from is None:
        return {"reason": reason.strip()}
    target = state.step(str(repeat_from))
    if target is None or isinstance(target.step, Sign) or target.status != "done":
        raise readings.InputProblem("repeat_from", "Choose a work step of this job that is "
                                    "done, or none to ask only for the signatures again.")
    return {"reason": reason.strip(), "repeat_from": target.id}


def awaiting_review(state: JobState) -> bool:
    """All the work and its performer/inspector signatures are in; certification is next."""
    upcoming = state.next_step
    return (upcoming is not None and isinstance(upcoming.step, Sign)
            and upcoming.step.role == "certifying")


def _signed_by(state: JobState, role: str) -> dict[int, int]:
    """Who signed a line of `role` in this revision of the job: person id -> step number."""
    return {e["person_id"]: state.positions[k] + 1 for k, e in state.completed.items()
            if e["kind"] == "signed" and e["data"].get("role") == role}


def _check_prerequisites(state: JobState, target: StepProgress) -> None:
    missing = [f"step {s.number} ({s.id})" for s in state.steps[:target.number - 1]
               if s.status != "done" and not isinstance(s.step, Sign)]
    missing += [f"the finding for step {state.positions[k] + 1} ({k})"
                for k in state.awaiting_finding]
    if missing:
        raise RuleRefusal("sign_prerequisites", "Not ready to sign; still to do: "
                          + ", ".join(missing) + ".", missing=missing)


def _check_signer(state: JobState, role: str, person_id: int, roles: Iterable[str],
                  held: Iterable[Authorisation], today: date) -> Authorisation:
    """The person may give this signature: the right relation to the work, and an
    authorisation for it (returned: the record names it)."""
    performers = _signed_by(state, "performer")
    if role == "performer":
        if person_id not in state.workers:
            raise RuleRefusal("performer_did_no_work", "You recorded no work on this job: a "
                              "performer signature comes from a person who did the work.")
        if person_id in performers:
            raise RuleRefusal("performer_signs_once", f"You already signed step "
                              f"{performers[person_id]} as performer: the other performer "
                              "line is signed by a second person who did the work.")
    elif person_id in state.workers or person_id in performers:
        verb = "inspects" if role == "inspector" else "certifies"
        raise RuleRefusal("inspector_is_performer", f"You performed this work: another "
                          f"person {verb} it.")
    if role == "certifying":
        if person_id in _signed_by(state, "inspector"):
            raise RuleRefusal("certifier_is_inspector", "You inspected this work: another "
                              "person certifies it for release to service.")
        if "supervisor" not in roles:
            raise RuleRefusal("certifier_role", "Only a certifying supervisor signs the "
                              "release to service.")
    return authorisation_for(held, role, state.procedure.ata, state.procedure.kind, today)


def check_signature(state: JobState, target: StepProgress, at: Circumstances
                    ) -> dict[str, Any]:
    """A signature needs the work it covers complete, and the right person for its meaning;
    the data stored with it names the authorisation it rests on (14 CFR 43.9(a)(4): the
    certificate number and kind)."""
    step = target.step
    assert isinstance(step, Sign)
    _check_prerequisites(state, target)
    used = _check_signer(state, step.role, at.person_id, at.roles, at.authorisations,
                         at.now.date())
    return {"role": step.role, "meaning": SIGNATURE_MEANINGS[step.role],
            "scope": SIGNATURE_SCOPE, "authorisation": used.licence_number,
            "licence_kind": used.licence_kind, "authorisation_id": used.id}


def signature_refusal(state: JobState, target: StepProgress, person_id: int,
                      roles: Iterable[str], authorisations: Iterable[Authorisation],
                      today: date) -> str | None:
    """Why this person cannot give the signature of a sign step now (None: they can); the
    same rule as `check_signature`, for screens that offer only what a person can sign."""
    step = target.step
    if not isinstance(step, Sign):
        return None
    try:
        _check_prerequisites(state, target)
        _check_signer(state, step.role, person_id, tuple(roles), tuple(authorisations), today)
    except RuleRefusal as refusal:
        return refusal.reason
    return None
