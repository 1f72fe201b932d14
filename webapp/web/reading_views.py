"""The step screen's reading helpers, made available to the templates."""

from __future__ import annotations

from collections.abc import Mapping
from datetime import date
from typing import Any

from flask import Flask

from ..domain import instruments, torque
from ..domain.execution import JobState, StepProgress
from ..domain.procedures import EXCITER_MODES, Torque
from ..domain.readings import VERDICT_SYMBOL
from ..shown import (
    conversion_table,
    limits_text,
    si_factor,
    si_text,
    unit_choices,
    unit_label,
)
from ..store import Database
from ..store import instruments as instrument_register


def register(app: Flask) -> None:
    app.jinja_env.globals.update(unit_choices=unit_choices, unit_label=unit_label,
                                 limits_text=limits_text, si_text=si_text, si_factor=si_factor,
                                 conversion_table=conversion_table, modes=EXCITER_MODES,
                                 verdict_symbol=lambda v: VERDICT_SYMBOL.get(v, ""),
                                 fastener_rows=fastener_rows)


def instrument_choices(db: Database, upcoming: StepProgress | None,
                       today: date) -> dict[str, Any]:
    """The kind of instrument the step's reading is taken with, and the register's
    instruments of that kind usable today (in service, in calibration), for its select."""
    kind = instruments.required_kind(upcoming.step) if upcoming is not None else None
    if kind is None:
        return {"instrument_kind": None, "instruments": []}
    usable = [i for i in instrument_register.all_instruments(db) if i.usable_for(kind, today)]
    return {"instrument_kind": kind, "instruments": usable}


def fastener_rows(step: Torque, state: JobState) -> list[dict[str, Any]]:
    """Each fastener of a torque step with its latest reading and whether it stands."""
    done = torque.accepted_fasteners(step, state.readings)
    latest: dict[str, Mapping[str, Any]] = {r["fastener"]: r for r in state.readings
                                           if r["step"] == step.id and r.get("fastener")}
    return [{"name": name, "reading": latest.get(name), "done": name in done}
            for name in step.fasteners]
