"""Sign-off: signatures, returns and amendments, and who may give each.

The rules a signature, a supervisor's return and an amendment after certification must
pass, on top of the job's order of work (checked in `execution`). Pure: plain values in,
a RuleRefusal or InputProblem out.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

from . import readings
from .errors import RuleRefusal
from .procedures import Sign

if TYPE_CHECKING:
    from .execution import Circumstances, JobState, StepProgress

# What each signature means (21 CFR 11.50(a)(3)); its scope is always this job's work only.
SIGNATURE_MEANINGS = {"performer": "Performed", "inspector": "Inspected",
                      "certifying": "Certified for release to service"}
SIGNATURE_SCOPE = "this job's work only"


def _is_sign(state: JobState, step_id: str) -> bool:
    found = state.step(step_id)
    return found is not None and isinstance(found.step, Sign)


def check_amendment(state: JobState, step_id: str | None, data: Mapping[str, Any]
                     ) -> dict[str, Any]:
    """A correction after certification: who (the event's person), why and what; it makes a
    new record revision and never overwrites the earlier one."""
    if state.status != "complete":
        raise RuleRefusal("not_certified", "Amendments are for certified jobs; while a job is "
                          "open its steps are corrected by recording them again.")
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


def check_signature(state: JobState, target: StepProgress, at: Circumstances
                     ) -> dict[str, Any]:
    """A signature needs the work it covers complete, and the right person for its meaning."""
    step = target.step
    assert isinstance(step, Sign)
    missing = [f"step {s.number} ({s.id})" for s in state.steps[:target.number - 1]
               if s.status != "done" and not isinstance(s.step, Sign)]
    missing += [f"the finding for step {state.positions[k] + 1} ({k})"
                for k in state.awaiting_finding]
    if missing:
        raise RuleRefusal("sign_prerequisites", "Not ready to sign; still to do: "
                          + ", ".join(missing) + ".", missing=missing)
    performers = [e["person_id"] for k, e in state.completed.items()
                  if e["kind"] == "signed" and e["data"].get("role") == "performer"]
    if step.role in ("inspector", "certifying") and at.person_id in performers:
        raise RuleRefusal("inspector_is_performer", "The person who performed the work cannot "
                          f"also sign as {step.role}: another person signs here.")
    if step.role == "certifying" and "supervisor" not in at.roles:
        raise RuleRefusal("certifier_role", "Only a certifying supervisor signs the release "
                          "to service.")
    return {"role": step.role, "meaning": SIGNATURE_MEANINGS[step.role],
            "scope": SIGNATURE_SCOPE}
