"""What the gate tests share: the demo procedures, an engine's fit, times and events (all
invented for the demo; the QT-610 engine and its data are fictional)."""

from __future__ import annotations

import itertools
from dataclasses import replace
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest

from webapp.domain import gates
from webapp.domain.checks import Circumstances, check_event
from webapp.domain.engine import EngineState, apply_engine_event, starting_state
from webapp.domain.errors import RuleRefusal
from webapp.domain.execution import (
    COMPLETING_EVENT,
    JobState,
    apply_event,
    configuration_for,
    job_state,
)
from webapp.domain.gates import Tag
from webapp.domain.instruments import Instrument
from webapp.domain.procedure_files import parse_procedure
from webapp.domain.procedures import DutyCycle, Procedure

TASKS = Path(__file__).resolve().parents[2] / "tasks"
REMOVAL = parse_procedure((TASKS / "exciter-removal.yaml").read_text(encoding="utf-8"))
FUNCTIONAL = parse_procedure(
    (TASKS / "ignition-functional-check.yaml").read_text(encoding="utf-8"))

# An engine with a DC exciter and a surface-discharge plug on each channel (demo fleet record).
DC_ENGINE = [
    {"kind": "exciter", "type": "dc", "channel": "A"},
    {"kind": "exciter", "type": "dc", "channel": "B"},
    {"kind": "plug", "type": "surface-discharge", "channel": "A"},
    {"kind": "plug", "type": "surface-discharge", "channel": "B"},
]

T0 = datetime(2026, 12, 1, 8, 0, tzinfo=UTC)   # invented demo morning
MECH = 1          # the mechanic doing this job (invented)
OTHER = 7         # a mechanic on another job on the same engine (invented)
JOB = 11          # this job
OTHER_JOB = 12    # another job on the same engine


_EVENT_NUMBERS = itertools.count(1)


def _t(seconds: float) -> datetime:
    return T0 + timedelta(seconds=seconds)


def _event(kind: str, step_id: str | None = None, data: dict[str, Any] | None = None, *,
           at_s: float = 0.0, person: int = MECH, job: int = JOB,
           device_time: datetime | None = None) -> dict[str, Any]:
    return {"id": f"e-{next(_EVENT_NUMBERS)}", "kind": kind, "step_id": step_id,
            "data": {} if data is None else data,
            "person_id": person, "job_id": job, "received_at": _t(at_s).isoformat(),
            "device_time": device_time.isoformat() if device_time else None}


def _refused(call, *args, **kwargs) -> RuleRefusal:
    with pytest.raises(RuleRefusal) as refused:
        call(*args, **kwargs)
    return refused.value



def _step(procedure: Procedure, step_id: str):
    return next(s for s in procedure.steps if s.id == step_id)


def _tagged(tag: str, breaker: str, *, person: int = MECH, job: int = JOB,
            at_s: float = 0.0) -> dict[str, Any]:
    return _event("breaker_tagged", "breakers", {"tag": tag, "breaker": breaker},
                  at_s=at_s, person=person, job=job)


# Demo duty cycle, invented: 2 min on, 3 min off, 2 min on, 23 min off.
PATTERN = DutyCycle.model_validate({"pattern": ["on 2 min", "off 3 min", "on 2 min",
                                                "off 23 min"]})
PERIODS = gates.duty_periods(PATTERN)


# The register these jobs' readings are taken with (invented; due far ahead).
TEST_REGISTER = {"VM-1": Instrument("VM-1", "voltmeter", 0.0, 600.0, "V", date(2099, 12, 31))}


class _Job:
    """A job's log and state, each event checked by the rules before it is applied."""

    def __init__(self, procedure: Procedure, channel: str | None) -> None:
        configuration = configuration_for(procedure, "QT-610", DC_ENGINE, channel)
        self.procedure = procedure
        self.events: list[dict[str, Any]] = [{
            "kind": "job_opened", "step_id": None, "data": configuration.as_data(),
            "person_id": MECH, "job_id": JOB, "received_at": _t(-3600).isoformat(),
            "device_time": None}]
        self.engine_events: list[dict[str, Any]] = []   # tag events of every job on the engine
        self.state: JobState = job_state(procedure, self.events)
        # The engine this job works on: every part fitted, as the fleet lists it (invented).
        self.engine: EngineState = starting_state(
            {"part_number": "P", "serial": f"S-{part['kind']}-{part['channel']}", **part}
            for part in [*DC_ENGINE, *({"kind": "lead", "type": "ht-lead", "channel": c}
                                       for c in "AB")])

    @property
    def tags(self) -> dict[str, Tag]:
        return gates.engine_tags(self.engine_events)

    def at(self, at_s: float, device_now: datetime | None = None,
           tags: dict[str, Tag] | None = None,
           names: dict[int, str] | None = None) -> Circumstances:
        return Circumstances(now=_t(at_s), device_now=device_now, person_id=MECH, job_id=JOB,
                             tags=self.tags if tags is None else tags, names=names or {},
                             engine=self.engine)

    def record(self, kind: str, step_id: str | None, data: dict[str, Any] | None = None, *,
               at_s: float, device_time: datetime | None = None) -> dict[str, Any]:
        data = {} if data is None else data
        at = replace(self.at(at_s, device_time),
                     instrument=TEST_REGISTER.get(str(data.get("instrument_id"))))
        stored = dict(check_event(self.state, kind, step_id, data, at))
        return self.apply(_event(kind, step_id, stored, at_s=at_s, device_time=device_time))

    def apply(self, event: dict[str, Any]) -> dict[str, Any]:
        """Store an event without the checks (as a log synced from elsewhere would hold it)."""
        self.events.append(event)
        if event["kind"] in gates.TAG_EVENT_KINDS:
            self.engine_events.append(event)
        self.state = apply_event(self.state, event)
        self.engine = apply_engine_event(self.engine, {"id": "-", **event})
        return event

    def elsewhere(self, event: dict[str, Any]) -> None:
        """A tag event of another job on the same engine: in the engine's tags, not this log."""
        self.engine_events.append(event)

    def done(self, step_id: str, *, at_s: float) -> dict[str, Any]:
        """Complete a step with the event its kind takes, every item ticked."""
        step = next(s for s in self.state.applicable if s.id == step_id)
        items = getattr(step, "items", None)
        data = {"items": list(range(len(items)))} if items else {}
        return self.record(COMPLETING_EVENT[step.kind], step_id, data, at_s=at_s)

    def refusal(self, kind: str, step_id: str | None, data: dict[str, Any] | None = None, *,
                at: Circumstances) -> RuleRefusal:
        return _refused(check_event, self.state, kind, step_id, {} if data is None else data, at)


def _removal_at_lockout() -> _Job:
    job = _Job(REMOVAL, "A")
    for at_s, step_id in ((0, "identify"), (10, "selectors-off"),
                          (20, "lethal-energy-breakers")):
        job.done(step_id, at_s=at_s)
    assert job.state.next_step.id == "breakers"
    return job


def _removal_at_discharge(disconnected_at_s: float = 100,
                          device_time: datetime | None = None) -> _Job:
    job = _removal_at_lockout()
    job.record("breaker_tagged", "breakers", {"breaker": "IGN-A", "tag": "T-0101"}, at_s=30)
    job.record("breaker_tagged", "breakers", {"breaker": "IGN-B", "tag": "T-0102"}, at_s=40)
    job.done("breakers", at_s=50)
    job.done("input-first", at_s=60)
    job.record("step_done", "disconnect-input", at_s=disconnected_at_s, device_time=device_time)
    assert job.state.next_step.id == "discharge"
    return job
