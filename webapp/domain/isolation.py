"""Energy control at the work: isolation verified after a lockout, and the high-tension lead
grounded shortly before it or the exciter is handled.

Two rules a step must pass before it is recorded, whatever the procedure file says:

- Work that disturbs a connection (the exciter's input or its lead, at either end) or handles
  a part waits for the isolation to be verified on this job: after the lockout, before the
  work starts, the person checks that the energy is really off (29 CFR 1910.147(d)(6),
  "verification of isolation"). The step that disconnects the input (`power: removed`) is
  the isolating itself and does not wait for it.
- A step that handles the lead or the exciter waits for the lead to have been grounded with
  the insulated probe within `GROUNDING_VALID_S` (by the station's clock and, where known,
  the device's: the longer of the two counts). A pause longer than that (a break, a shift
  change, a part fetched from stores) means grounding again: the exciter's bleed resistor
  may have failed, so the charge may have come back from nowhere the mechanic can see. The
  disconnection that first exposes the lead's terminal is exempt: the terminal cannot be
  grounded before it is reachable; the discharge wait and the isolation check cover it.

The procedure validator (`procedure_files`) holds the files to the same definitions.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from datetime import datetime
from typing import TYPE_CHECKING, Any

from .errors import RuleRefusal
from .gates import PowerOff, mmss
from .procedure_sanity import DataProblem
from .procedures import Check, DischargeWait, Lockout, PartChange, Procedure, Reading, Step

if TYPE_CHECKING:
    from .execution import JobState

# How long a grounding of the lead counts for handling it: common practice, no source (a
# shop's choice; the approved data or local practice may ask for a shorter time).
GROUNDING_VALID_S = 15 * 60

LEAD_CONNECTIONS = frozenset({"lead_at_exciter", "lead_at_plug"})
HANDLED_PARTS = ("exciter", "lead")  # parts that hold or carry the exciter's charge

# Decision rule for an isolation check: it is verified only by a verdict "within": a reading
# in the procedure's near-limit band, or above the limit, is "out of limits" (guarded
# acceptance: doubt stops the work, it never lets it go on).
ISOLATION_VERIFIED = "within"


def is_isolation_check(step: Step) -> bool:
    return isinstance(step, Reading) and step.verifies == "isolation"


def is_grounding(step: Step) -> bool:
    return isinstance(step, Check) and step.grounds_lead


def disturbs_work(step: Step) -> bool:
    """Work that must wait for the isolation check: a part handled (recorded, or a check
    marked `handles_lead`), a connection opened or made (except the input's own
    disconnection, which is the isolating)."""
    if isinstance(step, PartChange):
        return True
    if not isinstance(step, Check):
        return False
    disturbs = set(step.disturbs) - ({"input"} if step.power == "removed" else set())
    return bool(disturbs or step.restores or step.handles_lead)


def opens_lead(step: Step) -> bool:
    """A check that only takes the lead off (the step that makes its terminal reachable)."""
    return (isinstance(step, Check) and bool(LEAD_CONNECTIONS & set(step.disturbs))
            and not step.restores and not step.handles_lead)


def handles_lead(step: Step) -> bool:
    """A step that handles the high-tension lead or the exciter, which may hold a charge."""
    if isinstance(step, PartChange):
        return step.part in HANDLED_PARTS
    return isinstance(step, Check) and (
        step.handles_lead or bool(LEAD_CONNECTIONS & {*step.disturbs, *step.restores}))


def grounding_age_s(grounded: PowerOff, now: datetime, device_now: datetime | None) -> float:
    """Seconds since the lead was grounded: the longer of the station's and the device's
    counts (a device's later sync cannot make a grounding look fresher)."""
    age = (now - grounded.station).total_seconds()
    if grounded.device is not None and device_now is not None:
        age = max(age, (device_now - grounded.device).total_seconds())
    return age


def needs_grounding(state: JobState, step: Step) -> bool:
    """Whether this step may only be done within the grounding window (see the module)."""
    if not handles_lead(step):
        return False
    return not (state.lead_grounded is None and opens_lead(step))


def grounding_due(state: JobState, step: Step, now: datetime,
                  device_now: datetime | None = None) -> bool:
    """True when this step would be refused for want of a fresh grounding (for the screen,
    which offers to record it, and for the demo walk)."""
    if not needs_grounding(state, step):
        return False
    grounded = state.lead_grounded
    return grounded is None or grounding_age_s(grounded, now, device_now) > GROUNDING_VALID_S


def check_isolation_verified(state: JobState, step: Step) -> None:
    # 29 CFR 1910.147(d)(6): before work starts on equipment locked or tagged out, the
    # person verifies that isolation and de-energisation have been accomplished.
    if disturbs_work(step) and not state.isolation_verified:
        raise RuleRefusal("isolation_not_verified", "The isolation is not verified on this "
                          "job: after the lockout, check that the energy is really off (the "
                          "isolation check step) before you disturb a connection or handle a "
                          "part. Voltage present stops the work until it is found and "
                          "removed.", step=step.id)


def check_lead_grounded(state: JobState, step: Step, now: datetime,
                        device_now: datetime | None) -> None:
    if not grounding_due(state, step, now, device_now):
        return
    limit = GROUNDING_VALID_S // 60
    grounded = state.lead_grounded
    if grounded is None:
        raise RuleRefusal("lead_not_grounded", "The high-tension lead has not been grounded "
                          "on this job since the input was disconnected. Ground the lead's "
                          "terminal and the exciter output with the insulated probe and "
                          "record it before you handle the lead or the exciter.",
                          step=step.id, valid_for_s=GROUNDING_VALID_S)
    age = grounding_age_s(grounded, now, device_now)
    raise RuleRefusal("grounding_lapsed", f"The lead was last grounded at "
                      f"{grounded.station.strftime('%H:%M')} station time, {mmss(age)} "
                      f"ago; the lead and the exciter are handled within {limit} min of "
                      "grounding. Ground the lead's terminal and the exciter output again "
                      "with the insulated probe, record it ('Lead grounded again'), then "
                      "do this step.", step=step.id,
                      grounded_at=grounded.station.isoformat(),
                      seconds_since=int(age), valid_for_s=GROUNDING_VALID_S)


def check_before_step(state: JobState, step: Step, now: datetime,
                      device_now: datetime | None) -> None:
    """Both rules, in the order a mechanic meets them."""
    check_isolation_verified(state, step)
    check_lead_grounded(state, step, now, device_now)


def check_grounded_again(state: JobState) -> dict[str, Any]:
    """`lead_grounded`, at any step: the lead grounded again after a pause. Only once the
    procedure's own grounding step is done (the first grounding stands where the data puts
    it, after the lead is off)."""
    steps = [s for s in state.applicable if is_grounding(s)]
    if not steps:
        raise RuleRefusal("no_grounding_step", "This procedure has no grounding step: there "
                          "is no lead to ground in this job.")
    if not any(s.id in state.completed for s in steps):
        first = state.positions[steps[0].id] + 1
        raise RuleRefusal("grounding_step_first", f"Ground the lead at step {first} first, "
                          "where the procedure puts it; grounding again comes after a pause.")
    return {}


def finding_allowed(step: Step, data: Mapping[str, Any]) -> None:
    """A failed isolation check is never deferred: the work cannot start with energy
    present. The finding says what was found and what was done, then the check is taken
    again."""
    if is_isolation_check(step) and data.get("disposition") == "deferred":
        raise RuleRefusal("isolation_not_deferrable", "Voltage present (or a snap heard) "
                          "cannot be deferred: find the supply, isolate it, record what was "
                          "done (repaired or re-tested) and take the isolation check again.")


def isolation_verdict(step: Step, stored: dict[str, Any]) -> dict[str, Any]:
    """The stored reading of an isolation check, with the decision rule applied."""
    if is_isolation_check(step) and stored.get("verdict") != ISOLATION_VERIFIED:
        return {**stored, "verdict": "out of limits", "isolation": "not verified"}
    if is_isolation_check(step):
        return {**stored, "isolation": "verified"}
    return stored


# --- the procedure file's structure -------------------------------------------------------

def structure_problems(procedure: Procedure) -> Iterator[DataProblem]:
    """Where a procedure file leaves out what these rules need: an isolation check after each
    lockout that hangs tags (after the discharge wait, before the first disturbing step), and
    a grounding step before any step that handles the lead or the exciter."""
    steps = procedure.steps
    numbered = list(enumerate(steps, start=1))
    for lock_number, lockout in numbered:
        if not isinstance(lockout, Lockout) or lockout.action != "apply":
            continue
        after = numbered[lock_number:]
        first_work = next(((n, s) for n, s in after if disturbs_work(s)), None)
        end = first_work[0] if first_work else len(steps) + 1
        checks = [(n, s) for n, s in after if is_isolation_check(s)]
        in_place = [(n, s) for n, s in checks if n < end]
        waits = [n for n, s in after if isinstance(s, DischargeWait) and n < end]
        if not checks:
            yield DataProblem("a lockout that hangs tags needs an isolation check after it "
                              "(a reading with 'verifies: isolation') before any step that "
                              "disturbs a connection or handles a part (29 CFR "
                              "1910.147(d)(6))", lock_number, lockout.id, "verifies")
        elif not in_place and first_work is not None:
            yield DataProblem(f"disturbs a connection or handles a part before the isolation "
                              f"is verified: put the isolation check (step {checks[0][0]}, "
                              f"'{checks[0][1].id}') before it", first_work[0],
                              first_work[1].id, "kind")
        elif waits and all(n < waits[-1] for n, _ in in_place):
            yield DataProblem(f"the isolation check stands after the discharge wait (step "
                              f"{waits[-1]}): the energy is verified gone once it has bled "
                              "down", in_place[-1][0], in_place[-1][1].id, "verifies")
    grounded = False
    for number, step in numbered:
        if handles_lead(step) and not grounded and not opens_lead(step):
            yield DataProblem("handles the high-tension lead or the exciter: put a check with "
                              "'grounds_lead: true' before it (the lead grounded with the "
                              "insulated probe)", number, step.id, "kind")
        grounded = grounded or is_grounding(step)
