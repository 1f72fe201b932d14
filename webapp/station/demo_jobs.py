"""Demo jobs: a procedure worked through the station's own recording path, for the demo.

The demo station starts with jobs in the states a supervisor or mechanic would meet (one
waiting for certification, say), so each role has something to do at once. Every entry
goes through `recording.record_event`, the path a tablet's entries take, with the same
rules and gates; the values are invented demo readings inside each step's limits.
The bench uses the same walk to build its record.
"""

from __future__ import annotations

import uuid
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import date, datetime, timedelta
from typing import Any

from .. import store
from ..domain import instruments, torque
from ..domain.execution import JobState
from ..domain.instruments import Instrument
from ..domain.isolation import grounding_due
from ..domain.procedures import (
    Advisory,
    Check,
    DischargeWait,
    IgnitionRun,
    Lockout,
    PartChange,
    Reading,
    Sign,
    SparkCount,
    Torque,
)
from ..records.identity import StationAuthority
from ..store import engines
from ..store import instruments as register
from ..store.people import Person
from . import recording

STEP_GAP = timedelta(seconds=20)         # between two entries of the walk
DISCHARGE_PAST = timedelta(seconds=120)  # past the 2 min minimum of the demo exciters
DUTY_REST = timedelta(seconds=1500)      # past any duty-cycle off period (23 min at most)
COUNT_WINDOW = timedelta(seconds=30)     # the demo counts' timed window
DEMO_TAGS = ("T-1", "T-2", "T-3", "T-4")


@dataclass(frozen=True)
class Signer:
    person: Person
    pin: str


class WalkRefused(RuntimeError):
    """The station refused an entry of the walk: the demo data and the procedure disagree."""


def demo_instrument(step: Reading | Torque | SparkCount, register: Sequence[Instrument],
                    today: date, value: tuple[float, str] | None = None) -> dict[str, Any]:
    """The register's first instrument usable for the step today whose range covers `value`
    (none when the step needs none)."""
    kind = instruments.required_kind(step)
    if kind is None:
        return {}
    usable = next(i for i in register if i.usable_for(kind, today)
                  and (value is None or instruments.in_range(i, *value)))
    return {"instrument_id": usable.instrument_id}


def reading_data(step: Reading | Torque, state: JobState | None = None,
                 usage: Mapping[str, Any] | None = None,
                 register: Sequence[Instrument] = (), today: date | None = None
                 ) -> dict[str, Any]:
    """A demo reading inside the step's limits, in the step's own unit, with an instrument of
    `register` usable `today` (for a torque step that names its fasteners, the first one
    `state` has not yet accepted; for a wear reading, the engine's totals `usage`)."""
    if isinstance(step, Reading) and step.value == "text":
        return {"text": "XEX-1001-03 / XE-9001 (demo)"}
    if isinstance(step, Reading) and step.value == "pass_fail":
        return {"result": "pass"}
    assert step.limits is not None and step.unit is not None, step.id
    low, high = step.limits.min, step.limits.max
    value = ((low + high) / 2 if low is not None and high is not None
             else low * 1.5 if low is not None else (high or 0) / 2)
    data: dict[str, Any] = {"value": f"{value:g}", "unit": step.unit}
    if instruments.required_kind(step) is not None:
        assert today is not None, "a reading with an instrument needs the day it is taken"
        data.update(demo_instrument(step, register, today, (value, step.unit)))
    if isinstance(step, Torque):
        if step.fasteners:
            done = torque.accepted_fasteners(step, state.readings if state else ())
            data["fastener"] = next(f for f in step.fasteners if f not in done)
        return data
    for condition in step.conditions:
        data[condition] = ({"value": "45"} if condition == "humidity" else
                           {"value": "1000", "unit": "V"} if condition == "test_voltage" else
                           {"value": "18", "unit": "degC"})
    if step.wear:
        data["usage"] = {**DEMO_USAGE, **(usage or {})}
    return data


# The engine's totals a demo walk enters (engine hours, starts, continuous-ignition hours),
# invented; on an engine with an entry already, the walk enters that engine's last totals.
DEMO_USAGE = {"engine_hours": 812, "starts": 760, "continuous_ignition_hours": 150}


def engine_totals(db: store.Database, job_id: int) -> dict[str, Any]:
    """The totals a demo entry gives: the engine's last entry (the same minutes later), else
    the demo's starting figures."""
    last = engines.current(db, recording.load_job(db, job_id).row["engine_id"]).usage
    if last is None:
        return dict(DEMO_USAGE)
    return {k: v for k, v in last.totals().items() if v is not None}


def part_data(db: store.Database, job_id: int, step: PartChange) -> dict[str, Any]:
    """A demo part step: the part the engine has fitted comes off (failed, unserviceable); a
    new one of the position's first allowed part number goes on, with a new serial."""
    job = recording.load_job(db, job_id)
    engine_id, channel = job.row["engine_id"], job.state.configuration.channel or "A"
    if step.action == "remove":
        fitted = engines.current(db, engine_id).fitted(step.part, channel)
        assert fitted is not None, f"nothing fitted as the {step.part} on channel {channel}"
        return {"part_number": fitted.part_number, "serial": fitted.serial,
                "status": "unserviceable", "reason": "failed", "tag": f"U-{job_id:04d}",
                "usage": engine_totals(db, job_id)}
    allowed = next(a for a in engines.allowed_parts(db, engine_id)
                   if a.fits(step.part, channel))
    return {"part_number": allowed.part_number, "serial": f"N{job_id:03d}-{step.part[:2].upper()}"
            f"{channel}", "release": f"DEMO-REL-{job_id:04d}", "condition": "new",
            "usage": engine_totals(db, job_id)}


def demo_supply(db: store.Database, job_id: int) -> dict[str, str]:
    """A demo supply inside the normal limits of the job's exciters' bus (invented)."""
    state = recording.load_job(db, job_id).state
    return ({"voltage": "115", "frequency": "400"} if "ac" in state.configuration.exciter_types
            else {"voltage": "27.5"})


def walk(db: store.Database, job_id: int, *, by: Person, now: datetime,
         until: str | None = None, signers: Mapping[str, Signer] | None = None,
         authority: StationAuthority | None = None,
         workers: Mapping[str, Person] | None = None,
         deferrals: Mapping[str, Mapping[str, Any]] | None = None) -> datetime:
    """Record the job's steps in order, as `by` (a step named in `workers` as the person
    named for it, sign steps as the signer named for them), up to the step `until` (not
    included) or the end. A step named in `deferrals` records that reading (out of limits)
    and a deferred finding (text, reference, limit). Returns the clock after the walk; raises
    WalkRefused when the station refuses an entry."""

    def record(kind: str, step_id: str | None, data: dict[str, Any],
               person: Person | None = None) -> None:
        person = person or (workers or {}).get(step_id, by)
        outcome = recording.record_event(db, job_id, event_id=str(uuid.uuid4()), kind=kind,
                                         step_id=step_id, data=data, device_time=None,
                                         person=person, now=now, authority=authority)
        if outcome.status != "stored":
            why = outcome.refusal or outcome.problem
            raise WalkRefused(f"{kind} at {step_id} was {outcome.status}: {why}")

    while True:
        state = recording.load_job(db, job_id).state
        upcoming = state.next_step
        if upcoming is None or upcoming.id == until:
            return now
        step = upcoming.step
        if grounding_due(state, step, now):
            # After a pause the lead is grounded again before it is handled, as on the floor.
            record("lead_grounded", None, {}, (workers or {}).get(step.id, by))
            now += STEP_GAP
        if isinstance(step, Sign):
            signer = (signers or {}).get(step.id)
            if signer is None:
                raise WalkRefused(f"no demo signer is named for the sign step {step.id}")
            record("signed", step.id, {"pin": signer.pin}, signer.person)
        elif isinstance(step, Advisory) and step.kind in ("warning", "caution"):
            record("acknowledged", step.id, {})
        elif isinstance(step, Lockout) and step.action == "apply":
            for breaker, tag in zip(step.breakers, DEMO_TAGS, strict=False):
                record("breaker_tagged", step.id, {"breaker": breaker.id, "tag": tag})
            record("step_done", step.id, {})
        elif isinstance(step, DischargeWait):
            now += DISCHARGE_PAST
            record("step_done", step.id, {})
        elif step.id in (deferrals or {}):
            deferral = dict((deferrals or {})[step.id])
            record("reading_recorded", step.id, deferral.pop("reading"))
            record("finding", step.id, {**deferral, "disposition": "deferred"})
        elif isinstance(step, (Reading, Torque)):
            record("reading_recorded", step.id,
                   reading_data(step, recording.load_job(db, job_id).state,
                                engine_totals(db, job_id), register.all_instruments(db),
                                now.date()))
        elif isinstance(step, PartChange):
            record("part_recorded", step.id, part_data(db, job_id, step))
        elif isinstance(step, IgnitionRun):
            now += DUTY_REST
            record("energised", step.id, {})
        elif isinstance(step, SparkCount):
            # Demo counts: about 1.2 snaps a second on one channel, twice that on both.
            count = 70 if step.channel == "both" else 36
            record("count_started", step.id, {})
            now += COUNT_WINDOW
            record("sparks_counted", step.id, {"supply": demo_supply(db, job_id),
                                               **({"mode": step.mode} if step.mode else {}),
                                               "method": "timed", "count": count,
                                               "window_s": 30,
                                               **demo_instrument(
                                                   step, register.all_instruments(db),
                                                   now.date())})
        elif isinstance(step, Check) and step.items:
            record("step_done", step.id, {"items": list(range(len(step.items)))})
        else:
            record("step_done", step.id, {})
        now += STEP_GAP
