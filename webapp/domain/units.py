"""Quantities and units through pint: one registry for the whole station."""

from __future__ import annotations

from functools import lru_cache

import pint

# Dimensions a procedure field may ask for, named in the trade's words.
DIMENSIONS: dict[str, str] = {
    "length": "[length]",
    "mass": "[mass]",
    "force": "[length] * [mass] / [time] ** 2",
    "torque": "[length] ** 2 * [mass] / [time] ** 2",
    "resistance": "[mass] * [length] ** 2 / [time] ** 3 / [current] ** 2",
    "voltage": "[mass] * [length] ** 2 / [time] ** 3 / [current]",
    "current": "[current]",
    "capacitance": "[current] ** 2 * [time] ** 4 / [mass] / [length] ** 2",
    "time": "[time]",
    "energy": "[mass] * [length] ** 2 / [time] ** 2",
    "temperature": "[temperature]",
    "dimensionless": "dimensionless",
}


class UnitProblem(ValueError):
    """A unit text that is not a unit, or not of the dimension asked for."""


@lru_cache(maxsize=1)
def registry() -> pint.UnitRegistry:
    """The shared registry (building one costs ~0.4 s, so it is made once)."""
    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def _dimensionality(dimension: str) -> object:
    if dimension == "dimensionless":
        return registry().get_dimensionality("")
    return registry().get_dimensionality(DIMENSIONS[dimension])


def _dimension_name(unit: pint.Unit) -> str:
    """The trade's name for a unit's dimension ("torque", "force"), else pint's own."""
    for name in DIMENSIONS:
        if unit.dimensionality == _dimensionality(name):
            return name
    return str(unit.dimensionality)


@lru_cache(maxsize=512)
def parse_unit(text: str, dimension: str | None = None) -> pint.Unit:
    """Parse a unit symbol such as "lbf*in", "MΩ" or "min"; check its dimension.

    Raises UnitProblem with a sentence a trainer or mechanic can act on.
    """
    if not isinstance(text, str) or not text.strip():
        raise UnitProblem("a unit is needed here (for example mm, N*m, MΩ)")
    try:
        unit = registry().parse_units(text.strip())
    except Exception:  # pint's parser raises many kinds on malformed text: all mean "not a unit"
        raise UnitProblem(f"'{text}' is not a unit this station knows") from None
    if not isinstance(unit, pint.Unit):
        raise UnitProblem(f"'{text}' is not a unit this station knows")
    if dimension is not None:
        if unit.dimensionality != _dimensionality(dimension):
            got = _dimension_name(unit)
            raise UnitProblem(f"'{text}' is a unit of {got}, but {dimension} is needed here")
    return unit


def parse_quantity(text: str | int | float, dimension: str) -> pint.Quantity:
    """Parse "2 min", "4 uF" or "2.2 Mohm" as a quantity of the given dimension."""
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise UnitProblem(f"a {dimension} with its unit is needed here (for example '2 min')")
    if isinstance(text, (int, float)):
        raise UnitProblem(f"'{text}' has no unit: write the {dimension} with its unit")
    parts = text.strip().split(maxsplit=1)
    if len(parts) != 2:
        raise UnitProblem(f"'{text}' needs a number and a unit, such as '2 min'")
    number, unit_text = parts
    try:
        magnitude = float(number)
    except ValueError:
        raise UnitProblem(f"'{number}' in '{text}' is not a number") from None
    if magnitude != magnitude or magnitude in (float("inf"), float("-inf")):
        raise UnitProblem(f"'{text}' is not a finite number")
    return registry().Quantity(magnitude, parse_unit(unit_text, dimension))


def seconds(text: str) -> float:
    """A duration text ("2 min", "90 s") in seconds."""
    return float(parse_quantity(text, "time").to("second").magnitude)
