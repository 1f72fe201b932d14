"""How readings are shown to people, on the step screen and in the PDF record alike: unit
labels and choices, limits, conversions, one-line summaries.

Presentation only; conversions come from pint through webapp.domain.readings.
"""

from __future__ import annotations

import json
from functools import lru_cache

from .domain.procedures import Reading, Torque
from .domain.readings import UNIT_CHOICES, VERDICT_SYMBOL, dimension_of
from .domain.units import parse_unit, registry

SI_UNIT = {"torque": "N*m", "length": "mm", "resistance": "ohm", "current": "A",
           "voltage": "V", "temperature": "degC"}
_LABELS = {code: shown for choices in UNIT_CHOICES.values() for code, shown in choices}


def unit_label(code: str | None) -> str:
    return _LABELS.get(code or "", code or "")


@lru_cache(maxsize=64)
def unit_choices(procedure_unit: str) -> list[tuple[str, str]]:
    """The units a mechanic may enter for a reading in `procedure_unit` (its own first)."""
    choices = list(UNIT_CHOICES.get(dimension_of(procedure_unit), []))
    if procedure_unit not in [c for c, _ in choices]:
        choices.insert(0, (procedure_unit, unit_label(procedure_unit)))
    return choices


@lru_cache(maxsize=64)
def conversion_table(procedure_unit: str) -> str:
    """{unit: factor to the procedure's unit} as JSON (escaped into the attribute by Jinja)."""
    target = parse_unit(procedure_unit)
    factors = {code: registry().Quantity(1.0, parse_unit(code)).to(target).magnitude
               for code, _ in unit_choices(procedure_unit)
               if dimension_of(procedure_unit) != "temperature"}
    return json.dumps(factors)


def limits_text(step: Reading | Torque) -> str:
    unit = unit_label(step.unit)
    assert step.limits is not None
    low, high = step.limits.min, step.limits.max
    if low is not None and high is not None:
        text = f"{low:g} to {high:g} {unit}"
    elif low is not None:
        text = f"at least {low:g} {unit}"
    else:
        text = f"at most {high:g} {unit}"
    near = getattr(step, "near_margin", None)
    if near:
        text += f" (near the limit within {near:g} {unit})"
    return text


def si_factor(unit: str) -> tuple[float, str] | None:
    """(factor, label) taking a value in `unit` to the dimension's usual SI unit."""
    si = SI_UNIT.get(dimension_of(unit))
    if si is None or si == unit or dimension_of(unit) == "temperature":
        return None
    return (registry().Quantity(1.0, parse_unit(unit)).to(parse_unit(si)).magnitude,
            unit_label(si))


def si_text(value: float, unit: str) -> str:
    """The value in the dimension's usual SI unit, e.g. 270 lbf·in -> "30.51 N·m"."""
    si = SI_UNIT.get(dimension_of(unit))
    if si is None or si == unit:
        return ""
    converted = registry().Quantity(value, parse_unit(unit)).to(parse_unit(si)).magnitude
    return f"{converted:.4g} {unit_label(si)}"


def reading_summary(data: dict) -> str:
    """One line for a recorded reading: the value as entered, converted, and the verdict."""
    verdict = data.get("verdict")
    if verdict is None:
        return ""
    if "rate" in data:
        shown = f"{data['rate']:.0f} per minute"
        if data.get("method") == "timed":
            shown += f" ({data['count']} in {data['window_s']:g} s, ±{data['resolution']:g})"
        flags = []
        if data.get("double_taps"):
            flags.append(f"{len(data['double_taps'])} double tap(s) left out")
        if data.get("missed"):
            flags.append(f"{sum(m[1] for m in data['missed'])} snap(s) inferred missed, "
                         "not counted")
        if flags:
            shown += " (" + ", ".join(flags) + ")"
        if data.get("both_check"):
            shown += f"; A + B: {data['both_check']['result']}"
        supply = data.get("supply")
        if isinstance(supply, dict):
            shown += f"; supply {supply['voltage']:g} V" + (
                f" {supply['frequency']:g} Hz" if supply.get("frequency") else "") + (
                "" if supply.get("within") else " (outside its limits: the count proves "
                "nothing)")
    elif "value" in data and "unit" in data:
        shown = f"{data['value']:g} {unit_label(data['unit'])}"
        if data["unit"] != data.get("procedure_unit"):
            shown += f" = {data['converted']:.4g} {unit_label(data['procedure_unit'])}"
        si = si_text(data["converted"], data["procedure_unit"])
        if si:
            shown += f" ({si})"
    elif "result" in data:
        shown = data["result"]
    elif "disposition" in data:
        return f"finding: {data['disposition']}"
    else:
        return data.get("text", "")
    if verdict == "recorded":
        return shown
    return f"{shown} {VERDICT_SYMBOL.get(verdict, '')} {verdict}"
