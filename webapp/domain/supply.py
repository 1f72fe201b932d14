"""The supply a spark count was taken at: a DC unit's rate depends on its input voltage, so
a count is judged only with the supply it was made at, and that supply against its own
limits. A count made at a supply outside them proves nothing about the unit."""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from typing import Any

from .procedures import Limits, SupplyLimits
from .readings import InputProblem

# Normal steady-state limits of an aircraft electrical bus, used where the procedure gives
# none. MIL-STD-704F, normal operation (from memory): 28 V DC 22-29 V; 115 V AC 108-118 V
# at 393-407 Hz for a 400 Hz constant-frequency bus.
DEFAULT_DC_VOLTS = Limits(min=22.0, max=29.0)
DEFAULT_AC_VOLTS = Limits(min=108.0, max=118.0)
DEFAULT_AC_HERTZ = Limits(min=393.0, max=407.0)


def supply_kind(exciter_types: Iterable[str]) -> str:
    """AC for AC-supplied exciters, DC for DC and transistorised ones (a job for both
    channels with both kinds fitted is judged as AC, which asks for more)."""
    return "ac" if "ac" in set(exciter_types) else "dc"


def _figure(raw: Mapping[str, Any], name: str, said: str) -> float:
    value = raw.get(name)
    try:
        number = float(str(value).strip().replace(",", "."))
    except ValueError:
        number = math.nan
    if value in (None, "") or not math.isfinite(number) or not 0 < number < 100_000:
        raise InputProblem(f"supply_{name}", f"Enter the {said} the exciter was supplied at "
                           "during the count, read at its input.")
    return number


def _judge(value: float, limits: Limits) -> bool:
    return ((limits.min is None or value >= limits.min)
            and (limits.max is None or value <= limits.max))


def evaluate_supply(kind: str, raw: Any, given: SupplyLimits | None) -> dict[str, Any]:
    """The supply as recorded, with its limits and whether it is within them."""
    if not isinstance(raw, Mapping):
        raise InputProblem("supply_voltage", "Record the supply voltage at the exciter's "
                           "input during the count" + (" and its frequency." if kind == "ac"
                                                        else "."))
    volts = _figure(raw, "voltage", "voltage (V)")
    limits = {"dc": (given.dc_volts if given else None) or DEFAULT_DC_VOLTS,
              "ac": (given.ac_volts if given else None) or DEFAULT_AC_VOLTS}[kind]
    stored: dict[str, Any] = {"kind": kind, "voltage": volts,
                              "voltage_limits": limits.model_dump()}
    within = _judge(volts, limits)
    if kind == "ac":
        hertz = _figure(raw, "frequency", "frequency (Hz)")
        hz_limits = (given.ac_hertz if given else None) or DEFAULT_AC_HERTZ
        stored.update(frequency=hertz, frequency_limits=hz_limits.model_dump())
        within = within and _judge(hertz, hz_limits)
    stored["within"] = within
    return stored
