"""What the gate tests share: the demo procedures, an engine's fit, times and events (all
invented for the demo; the QT-610 engine and its data are fictional)."""

from __future__ import annotations

import itertools
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest

from webapp.domain import gates
from webapp.domain.errors import RuleRefusal
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
