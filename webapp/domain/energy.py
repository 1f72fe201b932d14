"""Stored energy in an exciter's capacitor and its bleed-down through the bleed resistor.

Advisory only: the discharge gate never waits less than the approved data's
minimum, and an open bleed resistor makes the real time constant hours, which
is why the lead is grounded before anyone handles it.

All values in SI units: farads, volts, ohms, seconds, joules, coulombs.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

# Published thresholds the estimate is classified against (each names its source below).
SHOCK_HAZARD_VOLTS = 100.0        # capacitor hazard class: >= 100 V and >= 10 J
SHOCK_HAZARD_JOULES = 10.0        # (DOE classification, LBNL ESM Table 2.2.13)
ACCESSIBLE_CHARGE_COULOMBS = 45e-6  # IEC 60335-1 8.1.4: 45 uC between 450 V and 15 kV
ACCESSIBLE_CHARGE_BAND_VOLTS = (450.0, 15_000.0)
HIGH_VOLTAGE_ENERGY_JOULES = 0.350  # IEC 60335-1 8.1.4: 350 mJ above 15 kV
MACHINERY_RESIDUAL_VOLTS = 60.0   # IEC 60204-1 6.2.4: > 60 V must fall to <= 60 V in 5 s
MACHINERY_DISCHARGE_SECONDS = 5.0
MACHINERY_EXEMPT_COULOMBS = 60e-6  # ... parts holding <= 60 uC are exempt


def _positive(**values: float) -> None:
    for name, value in values.items():
        if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
            raise ValueError(f"{name} must be a finite number above zero, not {value!r}")


def _finite(**values: float) -> None:
    for name, value in values.items():
        if not (isinstance(value, (int, float)) and math.isfinite(value)):
            raise ValueError(f"{name} must be a finite number, not {value!r}")


def stored_energy(capacitance: float, voltage: float) -> float:
    """E = ½·C·V² (joules)."""
    _positive(capacitance=capacitance)
    _finite(voltage=voltage)
    return 0.5 * capacitance * voltage * voltage


def stored_charge(capacitance: float, voltage: float) -> float:
    """Q = C·V (coulombs)."""
    _positive(capacitance=capacitance)
    _finite(voltage=voltage)
    return capacitance * voltage


def time_constant(resistance: float, capacitance: float) -> float:
    """τ = R·C (seconds)."""
    _positive(resistance=resistance, capacitance=capacitance)
    return resistance * capacitance


def voltage_after(initial_voltage: float, resistance: float, capacitance: float,
                  seconds: float) -> float:
    """V(t) = V0·e^(−t/RC): the capacitor's voltage `seconds` after power was removed."""
    if not (isinstance(seconds, (int, float)) and math.isfinite(seconds)) or seconds < 0:
        raise ValueError(f"time since power-off must be a finite number of seconds, at least 0, "
                         f"not {seconds!r}")
    _finite(initial_voltage=initial_voltage)
    return initial_voltage * math.exp(-seconds / time_constant(resistance, capacitance))


def time_to_voltage(initial_voltage: float, threshold: float, resistance: float,
                    capacitance: float) -> float:
    """t = RC·ln(V0/V): seconds to bleed down from V0 to `threshold` (0 if already there)."""
    _positive(initial_voltage=initial_voltage, threshold=threshold)
    tau = time_constant(resistance, capacitance)  # checked even when no wait is needed
    if threshold >= initial_voltage:
        return 0.0
    return tau * math.log(initial_voltage / threshold)


@dataclass(frozen=True)
class HazardClass:
    """How a charged capacitor compares with the published thresholds."""

    shock_hazard: bool          # >= 100 V and >= 10 J
    over_accessible_charge: bool  # above IEC 60335-1's accessible limit for its voltage
    machinery_rule_met: bool    # IEC 60204-1: <= 60 V within 5 s (or exempt by charge)


def classify(capacitance: float, voltage: float, resistance: float) -> HazardClass:
    """Classify a capacitor charged to `voltage` that bleeds through `resistance`."""
    time_constant(resistance, capacitance)  # a bad R or C is refused, never classified
    energy = stored_energy(capacitance, voltage)
    charge = stored_charge(capacitance, voltage)
    low, high = ACCESSIBLE_CHARGE_BAND_VOLTS
    if voltage > high:
        over = energy > HIGH_VOLTAGE_ENERGY_JOULES
    elif voltage >= low:
        over = charge > ACCESSIBLE_CHARGE_COULOMBS
    else:
        over = False
    exempt = charge <= MACHINERY_EXEMPT_COULOMBS or voltage <= MACHINERY_RESIDUAL_VOLTS
    met = exempt or voltage_after(voltage, resistance, capacitance,
                                  MACHINERY_DISCHARGE_SECONDS) <= MACHINERY_RESIDUAL_VOLTS
    return HazardClass(shock_hazard=voltage >= SHOCK_HAZARD_VOLTS
                       and energy >= SHOCK_HAZARD_JOULES,
                       over_accessible_charge=over, machinery_rule_met=met)
