"""What a tablet's offline form needs for readings, lead handling and parts (web/carry.py).

Everything a rule needs that the tablet cannot work out itself is computed here by the
station's own code: unit conversions by pint (a factor and an offset per unit, so the tablet
never re-implements pint), the station's sentence for a unit of the wrong dimension, the
plausible bounds, and the register's instruments as they stand at carry time. The tablet
applies these (static/js/tablet_reading.js, tablet_lead.js, tablet_part.js); the station
checks every entry again when it arrives, and its answer wins.
"""

from __future__ import annotations

from datetime import date
from typing import Any

from ..domain import instruments, isolation, readings
from ..domain.engine import EngineState
from ..domain.instruments import Instrument
from ..domain.procedures import PartChange, Reading, Step, Torque
from ..domain.units import parse_quantity, parse_unit, registry
from ..shown import limits_text, unit_choices, unit_label

# Why a reading waits for the station even though readings are carried.
READING_NEEDS_STATION = ("A plug wear reading is tied to the plug's serial and the engine's "
                         "totals by the station.")
INSTALL_NEEDS_STATION = ("A part put on is checked by the station against the parts this "
                         "position may take and every engine of the fleet (a serial cannot be "
                         "fitted in two places).")


def _linear(unit: str, target: str) -> list[float]:
    """[factor, offset] with value * factor + offset = the value in `target` (pint)."""
    def to(value: float) -> float:
        quantity = registry().Quantity(value, parse_unit(unit))
        return float(quantity.to(parse_unit(target)).magnitude)
    zero = to(0.0)
    return [to(1.0) - zero, zero]


def _to_base(unit: str, dimension: str) -> list[float]:
    """[factor, offset] to the units `readings.PLAUSIBLE` is given in."""
    if dimension == "temperature":
        return _linear(unit, "degC")
    if dimension == "dimensionless":
        return _linear(unit, "dimensionless")
    base = registry().Quantity(1.0, parse_unit(unit)).to_base_units()
    return [float(base.magnitude), 0.0]


def unit_table(procedure_unit: str) -> dict[str, Any]:
    """The units a mechanic may pick for a value in `procedure_unit`, each with its
    conversion to that unit and to the plausibility check's unit; and, for every other unit
    the station offers anywhere, the station's own words when it is picked here."""
    dimension = readings.dimension_of(procedure_unit)
    choices = unit_choices(procedure_unit)
    units = [{"unit": code, "label": label, "to_procedure": _linear(code, procedure_unit),
              "to_base": _to_base(code, dimension)} for code, label in choices]
    offered = {code for code, _ in choices}
    wrong: dict[str, str] = {}
    for options in readings.UNIT_CHOICES.values():
        for code, _ in options:
            if code in offered:
                continue
            try:
                readings.measure("value", 1, code, procedure_unit, dimension)
            except readings.InputProblem as problem:
                wrong[code] = problem.message
    low, high = readings.PLAUSIBLE.get(dimension, (None, None))
    return {"unit": procedure_unit, "unit_label": unit_label(procedure_unit),
            "dimension": dimension, "units": units, "wrong_units": wrong,
            "plausible": [low, high]}


def _instrument(entry: Instrument, kind: str | None, units: list[str]) -> dict[str, Any]:
    carried: dict[str, Any] = {
        "id": entry.instrument_id, "kind": entry.kind, "status": entry.status,
        "calibration_due": entry.calibration_due.isoformat(), "range_low": entry.range_low,
        "range_high": entry.range_high, "range_unit": entry.range_unit,
        "range_text": entry.range_text, "range_label": unit_label(entry.range_unit)}
    if entry.kind == kind:
        # Each unit the form offers, converted to the instrument's own unit (its range check).
        carried["to_range"] = {u: _linear(u, entry.range_unit) for u in units}
    return carried


def instrument_register(step: Step, register: list[Instrument], today: date,
                        units: list[str]) -> dict[str, Any]:
    """The kind a step's reading is taken with and the register's instruments at carry time:
    all of them (so an ID typed offline that is overdue or of another kind is refused in the
    station's words), those usable today marked for the form's choice."""
    kind = instruments.required_kind(step)
    if kind is None:
        return {"instrument_kind": None, "instruments": []}
    return {"instrument_kind": kind, "carried_on": today.isoformat(),
            "instruments": [{**_instrument(i, kind, units),
                             "usable": i.usable_for(kind, today)} for i in register]}


def reading_form(step: Reading, register: list[Instrument], today: date) -> dict[str, Any]:
    data: dict[str, Any] = {"value": step.value, "isolation": isolation.is_isolation_check(step),
                            "conditions": list(step.conditions), "wear": step.wear,
                            "handles_lead": isolation.handles_lead(step),
                            "disturbs": isolation.disturbs_work(step)}
    units: list[str] = []
    if step.value == "number":
        assert step.unit is not None and step.limits is not None
        table = unit_table(step.unit)
        units = [u["unit"] for u in table["units"]]
        data.update(table, limits={"min": step.limits.min, "max": step.limits.max},
                    near_margin=step.near_margin, limits_text=limits_text(step))
        data["condition_units"] = {c: unit_table("V" if c == "test_voltage" else "degC")
                                   for c in step.conditions if c != "humidity"}
        data["test_voltage_v"] = (None if step.test_voltage is None else float(
            parse_quantity(str(step.test_voltage), "voltage").to("volt").magnitude))
    if step.value != "text":
        data.update(instrument_register(step, register, today, units))
    return data


def torque_form(step: Torque, register: list[Instrument], today: date) -> dict[str, Any]:
    """A torque step: its unit table, limits, lubricant factor, adapter and fasteners, and
    the register's torque wrenches (domain/torque.py, instruments.py)."""
    table = unit_table(step.unit)
    return {**table, "limits": {"min": step.limits.min, "max": step.limits.max},
            "near_margin": None, "limits_text": limits_text(step),
            "lubricant": step.lubricant, "lubricant_factor": step.lubricant_factor,
            "adapter": step.adapter, "adapter_in_line": step.adapter_in_line,
            "fasteners": list(step.fasteners),
            **instrument_register(step, register, today, [u["unit"] for u in table["units"]])}


def lead_rules(step: Step) -> dict[str, Any]:
    """What the tablet's mirror of `domain/isolation.py` needs of any step."""
    return {"disturbs": isolation.disturbs_work(step),
            "handles_lead": isolation.handles_lead(step),
            "opens_lead": isolation.opens_lead(step),
            "grounds_lead": isolation.is_grounding(step)}


def reading_offline(step: Reading) -> str | None:
    return READING_NEEDS_STATION if step.wear else None


def part_offline(step: PartChange) -> str | None:
    return None if step.action == "remove" else INSTALL_NEEDS_STATION


def part_form(step: PartChange) -> dict[str, Any]:
    return {"action": step.action, "part": step.part}


def fitted_parts(engine: EngineState | None, channels: list[str]) -> dict[str, Any]:
    """What the station has fitted at each position of the job's channels, now: a removed
    part's plate is compared with this on the tablet."""
    if engine is None:
        return {}
    out: dict[str, Any] = {}
    for kind in ("exciter", "lead", "plug"):
        for channel in channels:
            position = engine.position(kind, channel)
            fitted = position.fitted
            out[f"{kind}:{channel}"] = ({"part_number": fitted.part_number,
                                         "serial": fitted.serial, "label": position.label}
                                        if fitted else {"label": position.label})
    return out
