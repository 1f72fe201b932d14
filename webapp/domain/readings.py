"""Readings with units and limits: what was entered, what it is in the procedure's unit,
and the verdict; torque with its wrench and adapter; insulation with its test conditions.

The value is kept as entered (number and unit as the mechanic's tool showed them)
and converted with pint; the verdict is against the procedure's limits, with a
"near limit" band the procedure sets. Senseless input is refused with the field
to fix, and nothing is stored.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

import pint

from .errors import RuleRefusal
from .procedures import Reading
from .units import DIMENSIONS, UnitProblem, parse_quantity, parse_unit, registry

Verdict = Literal["within", "near limit", "out of limits"]
VERDICT_SYMBOL = {"within": "✓", "near limit": "▲", "out of limits": "✗"}
# What was done about an out-of-limits reading. Replaced, repaired and re-tested each ask for
# a new reading of the step within limits before the job goes on; deferred needs its
# reference and limit and becomes an open item of the engine.
DISPOSITIONS = ("replaced", "repaired", "re-tested", "deferred")

# Units offered at the field, by dimension (pint spellings, and how they are shown).
UNIT_CHOICES: dict[str, list[tuple[str, str]]] = {
    "length": [("mm", "mm"), ("in", "in"), ("thou", "thou")],
    "torque": [("N*m", "N·m"), ("lbf*in", "lbf·in"), ("lbf*ft", "lbf·ft"), ("kgf*cm", "kgf·cm")],
    "resistance": [("mohm", "mΩ"), ("ohm", "Ω"), ("kohm", "kΩ"), ("Mohm", "MΩ"),
                   ("Gohm", "GΩ")],
    "current": [("mA", "mA"), ("A", "A")],
    "voltage": [("V", "V"), ("kV", "kV")],
    "temperature": [("degC", "°C"), ("degF", "°F")],
    "dimensionless": [("percent", "%")],
}

# Beyond these a value is a slip of the finger, not a reading (SI units).
PLAUSIBLE: dict[str, tuple[float, float]] = {
    "length": (0.0, 0.5),                 # m: nothing on an igniter is half a metre
    "torque": (0.0, 2000.0),              # N·m
    "resistance": (0.0, 1e15),            # Ω
    "current": (0.0, 1000.0),             # A
    "voltage": (0.0, 100_000.0),          # V
    "temperature": (-80.0, 200.0),        # °C, as ambient
    "dimensionless": (0.0, 1.0),          # fraction
}


class InputProblem(ValueError):
    """A value that cannot be a reading: the field to fix and what is wrong. Nothing is kept."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(message)
        self.field = field
        self.message = message


def dimension_of(unit_text: str) -> str:
    """The trade's name of a unit's dimension ("torque", "length", ...)."""
    unit = parse_unit(unit_text)
    for name in DIMENSIONS:
        try:
            parse_unit(unit_text, name)
        except UnitProblem:
            continue
        return name
    return str(unit.dimensionality)


def read_number(field: str, raw: Any) -> float:
    if isinstance(raw, bool) or raw is None:
        raise InputProblem(field, "Enter a number.")
    if isinstance(raw, str):
        text = raw.strip().replace(",", ".")
        if not text:
            raise InputProblem(field, "Enter a number.")
        try:
            value = float(text)
        except ValueError:
            raise InputProblem(field, f"'{raw}' is not a number.") from None
    elif isinstance(raw, (int, float)):
        value = float(raw)
    else:
        raise InputProblem(field, "Enter a number.")
    if not math.isfinite(value):
        raise InputProblem(field, f"'{raw}' is not a finite number.")
    return value


@dataclass(frozen=True)
class Measured:
    """A number with its unit, as entered and in the procedure's unit."""

    value: float
    unit: str
    converted: float
    procedure_unit: str

    def as_data(self) -> dict[str, Any]:
        return {"value": self.value, "unit": self.unit, "converted": self.converted,
                "procedure_unit": self.procedure_unit}


def measure(field: str, raw_value: Any, raw_unit: Any, procedure_unit: str,
            dimension: str | None = None) -> Measured:
    """Read a number and its unit, check the unit's dimension and the magnitude, convert."""
    value = read_number(field, raw_value)
    if not isinstance(raw_unit, str) or not raw_unit.strip():
        raise InputProblem(f"{field}_unit", "Choose the unit your tool shows.")
    dimension = dimension or dimension_of(procedure_unit)
    try:
        unit = parse_unit(raw_unit, dimension)
    except UnitProblem as problem:
        raise InputProblem(f"{field}_unit", str(problem).capitalize() + ".") from None
    quantity = registry().Quantity(value, unit)
    low, high = PLAUSIBLE.get(dimension, (-math.inf, math.inf))
    base = quantity.to("degC").magnitude if dimension == "temperature" else (
        quantity.to_base_units().magnitude if dimension != "dimensionless"
        else quantity.to("dimensionless").magnitude)
    if not low <= base <= high:
        raise InputProblem(field, f"{value:g} {raw_unit} is not a plausible {dimension} "
                           "reading here: check the value and the unit.")
    try:
        converted = float(quantity.to(parse_unit(procedure_unit)).magnitude)
    except pint.errors.DimensionalityError:  # pragma: no cover - dimension checked above
        raise InputProblem(f"{field}_unit", "That unit cannot be converted.") from None
    return Measured(value, raw_unit.strip(), converted, procedure_unit)


@dataclass(frozen=True)
class LimitVerdict:
    verdict: Verdict
    symbol: str
    margin: float  # distance to the nearer limit, in the procedure's unit (negative: beyond)


def verdict(value: float, low: float | None, high: float | None,
            near_margin: float | None = None) -> LimitVerdict:
    """Within, near the limit (inside the procedure's margin) or out of limits; exactly at a
    limit is within it."""
    if not math.isfinite(value):
        raise InputProblem("value", "A reading must be a finite number.")
    margins = [m for m in ((value - low) if low is not None else None,
                           (high - value) if high is not None else None) if m is not None]
    margin = min(margins)
    if margin < 0:
        result: Verdict = "out of limits"
    elif near_margin is not None and margin <= near_margin:
        result = "near limit"
    else:
        result = "within"
    return LimitVerdict(result, VERDICT_SYMBOL[result], margin)


TEST_VOLTAGE_TOLERANCE = 0.05  # station rule: the tester set to the data's voltage, ±5 %


def _check_test_voltage(step: Reading, recorded_v: float) -> None:
    """An insulation reading depends on the voltage it was taken at: one taken at another
    voltage than the approved data's is not a reading of this step."""
    assert step.test_voltage is not None
    required = parse_quantity(str(step.test_voltage), "voltage").to("volt").magnitude
    if abs(recorded_v - required) > TEST_VOLTAGE_TOLERANCE * required:
        raise RuleRefusal("wrong_test_voltage", f"This reading is taken at {required:g} V "
                          f"(the approved data's test voltage); {recorded_v:g} V was recorded. "
                          f"Set the tester to {required:g} V and test again.",
                          required_v=required, recorded_v=recorded_v)


def evaluate_reading(step: Reading, data: Mapping[str, Any]) -> dict[str, Any]:
    """Check a reading's data and return what the station stores with it (the verdict too)."""
    if step.value == "text":
        text = data.get("text")
        if not isinstance(text, str) or not text.strip():
            raise InputProblem("text", "Write what you read.")
        if len(text) > 500:
            raise InputProblem("text", "Keep it under 500 characters.")
        return {"text": text.strip(), "verdict": "recorded"}
    if step.value == "pass_fail":
        result = data.get("result")
        if result not in ("pass", "fail"):
            raise InputProblem("result", "Choose pass or fail.")
        outcome: Verdict = "within" if result == "pass" else "out of limits"
        return {"result": result, "verdict": outcome}
    assert step.unit is not None and step.limits is not None  # the model requires them
    measured = measure("value", data.get("value"), data.get("unit"), step.unit)
    judged = verdict(measured.converted, step.limits.min, step.limits.max, step.near_margin)
    stored: dict[str, Any] = {**measured.as_data(), "verdict": judged.verdict,
                              "margin": judged.margin}
    for condition in step.conditions:
        stored[condition] = _condition(condition, data.get(condition))
    if step.test_voltage is not None:
        _check_test_voltage(step, stored["test_voltage"]["converted"])
    if step.wear:
        stored["usage"] = _usage(data.get("usage"))
    return stored


def _usage(raw: Any) -> dict[str, Any]:
    """The plug's usage at the inspection: engine hours, starts, continuous-ignition hours."""
    if not isinstance(raw, Mapping):
        raise InputProblem("engine_hours", "Record the engine hours, starts and "
                           "continuous-ignition hours with the wear reading.")
    usage: dict[str, Any] = {}
    for name, whole in (("engine_hours", False), ("starts", True),
                        ("continuous_ignition_hours", False)):
        value = read_number(name, raw.get(name))
        if value < 0 or value > 200_000:
            raise InputProblem(name, f"{value:g} is not a plausible figure for "
                               + name.replace("_", " ") + ".")
        if whole and value != int(value):
            raise InputProblem(name, "Starts are counted in whole numbers.")
        usage[name] = int(value) if whole else value
    usage["continuous_ignition_estimated"] = bool(raw.get("continuous_ignition_estimated"))
    return usage


_CONDITION_UNITS = {"test_voltage": ("V", "voltage"), "ambient_temperature": ("degC",
                                                                              "temperature")}


def _condition(name: str, raw: Any) -> dict[str, Any]:
    if not isinstance(raw, Mapping):
        raise InputProblem(name, "Record the " + name.replace("_", " ") + " with the reading.")
    if name == "humidity":
        value = read_number(name, raw.get("value"))
        if not 0 <= value <= 100:
            raise InputProblem(name, "Relative humidity is between 0 and 100 %RH.")
        return {"value": value, "unit": "%RH"}
    unit, dimension = _CONDITION_UNITS[name]
    return measure(name, raw.get("value"), raw.get("unit"), unit, dimension).as_data()


def evaluate_finding(data: Mapping[str, Any]) -> dict[str, Any]:
    """A finding on an out-of-limits reading, with its disposition."""
    text = data.get("text")
    if not isinstance(text, str) or not text.strip():
        raise InputProblem("text", "Describe what was found.")
    disposition = data.get("disposition")
    if disposition not in DISPOSITIONS:
        raise InputProblem("disposition", "Choose what was done: " + ", ".join(DISPOSITIONS)
                           + ".")
    stored = {"text": text.strip(), "disposition": disposition}
    if disposition == "deferred":
        reference = data.get("reference")
        if not isinstance(reference, str) or not reference.strip():
            raise InputProblem("reference", "A deferral needs its reference (the deferred "
                               "defect or work order number).")
        limit = data.get("limit")
        if not isinstance(limit, str) or not limit.strip() or len(limit.strip()) > 60:
            raise InputProblem("limit", "A deferral needs its limit: the hours, cycles or "
                               "date by which it must be put right (at most 60 characters).")
        stored.update(reference=reference.strip(), limit=limit.strip())
        # A deferred defect is an open item of the engine until a later job closes it.
        stored["engine"] = [{"effect": "defer", "text": stored["text"],
                             "reference": stored["reference"], "limit": stored["limit"]}]
    return stored
