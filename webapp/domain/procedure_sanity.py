"""Procedure files: the data checks that keep a discharge wait, a duty cycle and limits safe.

The models of `procedures` accept a value's form (a positive time, a voltage with its
unit); these checks look at what the values mean together: a wait that ends before the
capacitor has bled down, an exciter left without a rest after an on-period, limits no
reading can meet. `procedure_files.parse_procedure` runs them once a file has the right
form, and adds the file's name to each problem. Where a check cannot be sure, it refuses.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from typing import NamedTuple

from . import energy
from .gates import discharge_requirement
from .procedures import (
    EXCITER_MODES,
    Capacitor,
    CapacitorTable,
    DischargeWait,
    IgnitionRun,
    Limits,
    LimitsTable,
    Procedure,
    SparkCount,
    Step,
)
from .units import parse_quantity, seconds

# Any discharge wait lasts at least this long, unless the step gives `minimum_reason`.
# FAA-H-8083-32 (Powerplant handbook), ch. 4, turbine ignition: disconnect the input at the
# exciter and wait at least one minute before touching the high-tension lead (read in a
# secondary copy).
DISCHARGE_FLOOR_S = 60.0

# A safe voltage is at most the residual voltage IEC 60204-1 §6.2.4 lets a part keep:
# 60 V (read in a secondary copy).
SAFE_VOLTAGE_MAX_V = energy.MACHINERY_RESIDUAL_VOLTS

# What an ignition exciter's storage circuit can plausibly be, in SI units; generous on
# purpose, so that a value outside is a slip of unit or digit. From memory.
CIRCUIT_RANGES: dict[str, tuple[str, str, float, float, str]] = {
    # field: (dimension, SI unit, low, high, how the range is written for people)
    "capacitance": ("capacitance", "farad", 0.1e-6, 100e-6, "0.1 µF to 100 µF"),
    "charge_voltage": ("voltage", "volt", 100.0, 30e3, "100 V to 30 kV"),
    "bleed_resistance": ("resistance", "ohm", 1e3, 1e9, "1 kΩ to 1 GΩ"),
}


class DataProblem(NamedTuple):
    """One problem in a step's data; `procedure_files` adds the file to make it a
    ProcedureProblem (the fields are in the same order)."""

    message: str
    step_number: int
    step_id: str
    field: str


def data_problems(procedure: Procedure) -> Iterator[DataProblem]:
    """Every problem in the discharge waits, duty cycles and limits of a procedure's steps."""
    for number, step in enumerate(procedure.steps, start=1):
        if isinstance(step, DischargeWait):
            yield from _discharge_problems(step, number)
        elif isinstance(step, IgnitionRun):
            yield from _duty_cycle_problems(step, number)
        if isinstance(step, SparkCount) and step.mode is not None:
            yield from _mode_problems(procedure, step, number)
        limits = getattr(step, "limits", None)
        if isinstance(limits, Limits):
            yield from _limits_problems(step, limits, number)
        elif isinstance(limits, LimitsTable):
            yield from _limits_problems(step, limits.default, number, "limits.default")
            for part_number, row in limits.by_part_number.items():
                yield from _limits_problems(step, row, number,
                                            f"limits.by_part_number.{part_number}")


# --- discharge wait -----------------------------------------------------------------------

def _si(value: str | int | float, dimension: str, unit: str) -> float:
    return float(parse_quantity(str(value), dimension).to(unit).magnitude)


def _seconds_text(value: float) -> str:
    """Seconds for a message, rounded up to a tenth: writing the figure shown always passes."""
    return f"{math.ceil(value * 10) / 10:.1f} s"


def _discharge_problems(step: DischargeWait, number: int) -> Iterator[DataProblem]:
    def problem(field: str, message: str) -> DataProblem:
        return DataProblem(message, number, step.id, field)

    minimum_s = seconds(str(step.minimum))
    explained = bool(step.minimum_reason and step.minimum_reason.strip())
    if "minimum_reason" in step.model_fields_set and not explained:
        yield problem("minimum_reason", "is empty: say why the approved data allows this "
                      "wait, or remove the field")
    if not explained and minimum_s < DISCHARGE_FLOOR_S:
        yield problem("minimum", f"'{step.minimum}' is shorter than the "
                      f"{DISCHARGE_FLOOR_S:g} s every discharge wait lasts: wait at least one "
                      "minute after disconnecting the input, or, if the approved data says "
                      "less, give its words in 'minimum_reason'")
    capacitor = step.capacitor
    rows: list[tuple[Capacitor, str]] = []
    if isinstance(capacitor, Capacitor):
        rows = [(capacitor, "capacitor")]
    elif isinstance(capacitor, CapacitorTable):
        rows = [(capacitor.default, "capacitor.default"),
                *((row, f"capacitor.by_part_number.{p}")
                  for p, row in capacitor.by_part_number.items())]
    for cap, where in rows:
        yield from _capacitor_problems(step, cap, where, minimum_s, problem)


def _capacitor_problems(step: DischargeWait, cap: Capacitor, where: str, minimum_s: float,
                        problem: Callable[[str, str], DataProblem]) -> Iterator[DataProblem]:
    """One row of capacitor data: physical ranges, a safe voltage below the charge, and a
    minimum wait no shorter than its bleed-down."""
    for name, (dimension, unit, low, high, shown) in CIRCUIT_RANGES.items():
        value = getattr(cap, name)
        if not low <= _si(value, dimension, unit) <= high:
            yield problem(f"{where}.{name}", f"'{value}' is outside what an ignition "
                          f"exciter's storage circuit can be ({shown}): check the number "
                          "and its unit against the approved data")
    charge_v = _si(cap.charge_voltage, "voltage", "volt")
    safe_v = _si(cap.safe_voltage, "voltage", "volt")
    if safe_v > SAFE_VOLTAGE_MAX_V:
        yield problem(f"{where}.safe_voltage", f"'{cap.safe_voltage}' is above "
                      f"{SAFE_VOLTAGE_MAX_V:g} V, the highest residual voltage counted as "
                      "safe (IEC 60204-1 §6.2.4)")
    if safe_v >= charge_v:
        yield problem(f"{where}.safe_voltage", f"'{cap.safe_voltage}' is not below the "
                      f"charge voltage '{cap.charge_voltage}': the bleed-down cannot be "
                      "worked out; check both values")
        return
    bleed_s = discharge_requirement(step.model_copy(update={"capacitor": cap})).computed_s
    if minimum_s < (bleed_s or 0.0):
        yield problem("minimum", f"'{step.minimum}' ({minimum_s:g} s) is shorter than the "
                      f"bleed-down to the safe voltage ({where}), RC·ln(V0/Vsafe) = "
                      f"{_seconds_text(bleed_s or 0.0)}: make the minimum at least "
                      f"{_seconds_text(bleed_s or 0.0)}, or check the capacitor data")


# --- duty cycle ---------------------------------------------------------------------------

def _duty_cycle_problems(step: IgnitionRun, number: int) -> Iterator[DataProblem]:
    """An exciter rests after every on-period. Each entry's time (a positive duration) is
    already checked by the model; here the order of the entries."""
    pattern = step.duty_cycle.pattern
    if pattern is None:
        return
    states = [entry.split(" ", 1)[0] for entry in pattern]
    if "on" not in states:
        yield DataProblem("has no 'on' entry: give the on-periods the exciter is rated for, "
                          "each followed by its off-period", number, step.id,
                          "duty_cycle.pattern")
        return
    for index in range(1, len(states)):
        if states[index - 1] == states[index] == "on":
            yield DataProblem(f"'{pattern[index]}' follows another on-period: an exciter "
                              "rests after every on-period, so put the off-time between "
                              "them", number, step.id, f"duty_cycle.pattern.{index}")
    if states[-1] != "off":
        last = len(states) - 1
        yield DataProblem(f"the pattern ends with '{pattern[last]}': an exciter must rest "
                          "after its last on-period, so end with an 'off' entry", number,
                          step.id, f"duty_cycle.pattern.{last}")


# --- limits -------------------------------------------------------------------------------

def _limits_problems(step: Step, limits: Limits, number: int,
                     where: str = "limits") -> Iterator[DataProblem]:
    """Bounds are finite and min lies below max (min above max is refused by `Limits`)."""
    finite = True
    for name in ("min", "max"):
        value = getattr(limits, name)
        if value is not None and not math.isfinite(value):
            finite = False
            yield DataProblem(f"{value} is not a finite number: write the approved data's "
                              "limit, or leave this bound out", number, step.id,
                              f"{where}.{name}")
    if finite and limits.min is not None and limits.min == limits.max:
        yield DataProblem(f"min and max are both {limits.min:g}: no measured value can be "
                          "shown to lie within them; give the range the approved data "
                          "allows, min below max", number, step.id, where)


# --- combination units ----------------------------------------------------------------------

def _mode_problems(procedure: Procedure, step: SparkCount, number: int
                   ) -> Iterator[DataProblem]:
    """A combination unit is tested in each of its modes: a channel counted in one mode is
    counted in the other too."""
    modes = {s.mode for s in procedure.steps
             if isinstance(s, SparkCount) and s.channel == step.channel and s.mode is not None}
    for missing in sorted(set(EXCITER_MODES) - modes):
        yield DataProblem(f"channel {step.channel} is counted in the {step.mode} mode but "
                          f"not in the {missing} mode: a combination unit is tested in "
                          "each of its modes", number, step.id, "mode")
