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
from .procedures import Reading, Sign

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


# Recorded fields an amendment may correct: what a person entered, never what the station
# worked out from it (a verdict, a conversion) nor the engine's effects.
_DERIVED = frozenset({"verdict", "margin", "converted", "procedure_unit", "applied", "rate",
                      "resolution", "engine", "hash", "meaning", "scope", "pin",
                      "certificate_sha256", "within", "limits_from", "both_check", "channel"})


def amendable_fields(state: JobState, step_id: str) -> dict[str, Any]:
    """The step's recorded fields an amendment may correct, with their recorded values: the
    latest reading of a reading step, else the event that completed the step."""
    latest = next((r for r in reversed(state.readings) if r["step"] == step_id), None)
    source = latest if latest is not None else dict(
        (state.completed.get(step_id) or {}).get("data") or {})
    return {k: v for k, v in source.items() if k not in _DERIVED and not k.startswith("_")
            and isinstance(v, (str, int, float)) and not isinstance(v, bool)
            and k not in ("step", "kind", "attempt", "event", "person_id", "received_at")}


def check_amendment(state: JobState, step_id: str | None, data: Mapping[str, Any],
                    at: Circumstances) -> dict[str, Any]:
    """A correction after certification, by a supervisor: of one recorded field of one done
    step (the station takes the recorded value from the log; the supervisor gives the
    corrected one and why). It makes a new record revision and never overwrites the earlier
    one."""
    if state.status != "complete":
        raise RuleRefusal("not_certified", "Amendments are for certified jobs; while a job is "
                          "open its steps are corrected by recording them again.")
    if "supervisor" not in at.roles:
        raise RuleRefusal("amendment_role", "Only a supervisor amends a certified record: "
                          "tell a supervisor what needs correcting and why.")
    target = state.step(step_id) if step_id else None
    if target is None or target.status != "done" or isinstance(target.step, Sign):
        raise readings.InputProblem("step", "Choose the done work step whose record is "
                                    "corrected.")
    fields = amendable_fields(state, target.id)
    name = data.get("field")
    if not isinstance(name, str) or name not in fields:
        raise RuleRefusal("no_such_field", f"Step {target.number} has no recorded field "
                          f"'{name}' to correct; its fields are: "
                          + (", ".join(sorted(fields)) or "none") + ".",
                          fields=sorted(fields))
    stored: dict[str, Any] = {"step": target.id, "field": name, "old": fields[name]}
    for key, asked in (("new", "Give the corrected value."), ("why", "Say why.")):
        value = data.get(key)
        if not isinstance(value, str) or not value.strip() or len(value.strip()) > 300:
            raise readings.InputProblem(key, asked + " (at most 300 characters)")
        stored[key] = value.strip()
    if str(stored["old"]) == stored["new"]:
        raise readings.InputProblem("new", "The corrected value is the one recorded.")
    _judge_corrected_value(target.step, name, fields, stored)
    stored["what"] = (f"step {target.number} ({target.id}), {name}: recorded "
                      f"{stored['old']}, corrected to {stored['new']}")
    return {**stored, "meaning": "Amended"}


def _judge_corrected_value(step: Any, name: str, fields: Mapping[str, Any],
                           stored: dict[str, Any]) -> None:
    """A corrected reading value is judged against the step's limits as any reading is; an
    amendment cannot turn a certified reading out of limits (that is rework, not a record's
    correction)."""
    if not (isinstance(step, Reading) and step.value == "number" and name == "value"):
        return
    assert step.unit is not None and step.limits is not None
    measured = readings.measure("new", stored["new"], fields.get("unit") or step.unit,
                                step.unit)
    judged = readings.verdict(measured.converted, step.limits.min, step.limits.max,
                              step.near_margin)
    if judged.verdict == "out of limits":
        raise RuleRefusal("amendment_out_of_limits", f"The corrected value {stored['new']} is "
                          "outside the step's limits: the work needs a finding and rework on "
                          "a new job, not an amendment of the certified record.")
    stored["verdict"] = judged.verdict


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
