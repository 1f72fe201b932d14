"""The supply a spark count was taken at: a DC trembler unit's rate follows its input
voltage, so a count is judged only with the supply it was made at, and that supply
against its own limits, per exciter type as the approved data gives them (DC trembler,
transistorised and combination units on a DC bus, AC units by voltage and frequency). A
count made at a supply outside them proves nothing about the unit."""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

from .exciter_rows import narrowest
from .procedures import Limits, SupplyLimits, TypeSupply
from .readings import InputProblem

# Normal steady-state limits of an aircraft electrical bus, used where the procedure gives
# none. MIL-STD-704F, normal operation (from memory): 28 V DC 22-29 V; 115 V AC 108-118 V
# at 393-407 Hz for a 400 Hz constant-frequency bus.
DEFAULT_DC_VOLTS = Limits(min=22.0, max=29.0)
DEFAULT_AC_VOLTS = Limits(min=108.0, max=118.0)
DEFAULT_AC_HERTZ = Limits(min=393.0, max=407.0)
STATION_DEFAULT = "station default (normal bus limits)"


def supply_kind(exciter_types: Iterable[str]) -> str:
    """AC for AC-supplied exciters, DC for DC trembler, transistorised and combination ones
    (a count over both channels with both kinds fitted is judged as AC, which asks for
    more)."""
    return "ac" if "ac" in set(exciter_types) else "dc"


def type_supply(exciter_type: str, given: SupplyLimits | None) -> tuple[TypeSupply, str]:
    """One exciter type's supply limits and where they come from: the step's entry for the
    type, else its limits for every type of that supply, else the station's default."""
    entry = getattr(given, exciter_type, None) if given is not None else None
    if isinstance(entry, TypeSupply):
        entry_hz = entry.hertz or (given.ac_hertz if given else None) or DEFAULT_AC_HERTZ
        return (TypeSupply(volts=entry.volts, hertz=entry_hz if exciter_type == "ac" else None),
                f"procedure, {exciter_type} units")
    if exciter_type == "ac":
        ac_volts, ac_hz = (given.ac_volts, given.ac_hertz) if given else (None, None)
        return (TypeSupply(volts=ac_volts or DEFAULT_AC_VOLTS, hertz=ac_hz or DEFAULT_AC_HERTZ),
                "procedure" if ac_volts else STATION_DEFAULT)
    dc_volts = given.dc_volts if given else None
    return (TypeSupply(volts=dc_volts or DEFAULT_DC_VOLTS),
            "procedure" if dc_volts else STATION_DEFAULT)


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


def evaluate_supply(exciter_types: Sequence[str], raw: Any,
                    given: SupplyLimits | None) -> dict[str, Any]:
    """The supply as recorded, with its limits (the narrowest of the counted exciters'
    types: one bus feeds them during a count of both channels), where they come from, and
    whether it is within them."""
    kind = supply_kind(exciter_types)
    if not isinstance(raw, Mapping):
        raise InputProblem("supply_voltage", "Record the supply voltage at the exciter's "
                           "input during the count" + (" and its frequency." if kind == "ac"
                                                        else "."))
    volts = _figure(raw, "voltage", "voltage (V)")
    types = sorted({t for t in exciter_types if (t == "ac") == (kind == "ac")}) or [kind]
    rows = [type_supply(t, given) for t in types]
    limits = narrowest([r.volts for r, _ in rows])
    stored: dict[str, Any] = {"kind": kind, "exciter_types": types, "voltage": volts,
                              "voltage_limits": {"min": limits.min, "max": limits.max},
                              "limits_from": "; ".join(sorted({source for _, source in rows}))}
    within = _judge(volts, limits)
    if kind == "ac":
        hertz = _figure(raw, "frequency", "frequency (Hz)")
        hz_limits = narrowest([r.hertz or DEFAULT_AC_HERTZ for r, _ in rows])
        stored.update(frequency=hertz, frequency_limits={"min": hz_limits.min,
                                                         "max": hz_limits.max})
        within = within and _judge(hertz, hz_limits)
    stored["within"] = within
    return stored
