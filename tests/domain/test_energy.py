"""Stored energy and bleed-down: closed forms, an ODE reference, and the published thresholds.

Formulas (physics, textbook: the energy and charge of a capacitor and its RC discharge):
E = ½CV², Q = CV, τ = RC, V(t) = V0·e^(−t/RC), t = RC·ln(V0/V); checked here against
scipy.integrate.solve_ivp on dV/dt = −V/(RC).

The demo exciter (4 µF charged to 2.5 kV, 2.2 MΩ bleed resistor) is invented for the demo only.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from webapp.domain.energy import (
    HazardClass,
    classify,
    stored_charge,
    stored_energy,
    time_constant,
    time_to_voltage,
    voltage_after,
)

# Demo exciter: invented values for the demo only.
DEMO_C = 4e-6      # farads
DEMO_V = 2500.0    # volts
DEMO_R = 2.2e6     # ohms

REL = 1e-12        # closed form against hand arithmetic: only float rounding between them
ODE_REL = 1e-7     # closed form against the numerical ODE solution (solver run at rtol 1e-9)

BAD_POSITIVE = [0.0, -1e-6, -1.0, math.nan, math.inf, -math.inf]


def _discharge(initial_voltage: float, resistance: float, capacitance: float, t_end: float,
               **kwargs):
    """Integrate dV/dt = −V/(RC) numerically, independent of the module under test."""
    return solve_ivp(lambda t, v: -v / (resistance * capacitance), (0.0, t_end),
                     [initial_voltage], method="DOP853", rtol=1e-9, atol=1e-12, **kwargs)


# --- closed forms against hand-computed values ---------------------------------------------

@pytest.mark.parametrize(("capacitance", "voltage", "joules"), [
    (DEMO_C, DEMO_V, 12.5),   # ½ · 4e-6 F · (2500 V)² = ½ · 4e-6 · 6.25e6 = 12.5 J
    (1e-6, 1000.0, 0.5),      # ½ · 1e-6 · 1e6 = 0.5 J
    (2e-3, 100.0, 10.0),      # ½ · 2e-3 · 1e4 = 10 J
    (1e-9, 20_000.0, 0.2),    # ½ · 1e-9 · 4e8 = 0.2 J
    (DEMO_C, 0.0, 0.0),       # a discharged capacitor holds nothing
])
def test_stored_energy_is_half_c_v_squared(capacitance, voltage, joules):
    assert stored_energy(capacitance, voltage) == pytest.approx(joules, rel=REL, abs=0.0)


def test_demo_exciter_energy_is_in_the_high_energy_start_range():
    # High-energy start output ~12 J — common practice, no source. 12.5 J as above.
    assert stored_energy(DEMO_C, DEMO_V) == pytest.approx(12.0, rel=0.1)


def test_stored_energy_quadruples_when_voltage_doubles():
    # E ∝ V²: ½C(2V)² = 4 · ½CV²
    assert stored_energy(DEMO_C, 2 * DEMO_V) == pytest.approx(
        4 * stored_energy(DEMO_C, DEMO_V), rel=REL)


@pytest.mark.parametrize(("capacitance", "voltage", "coulombs"), [
    (DEMO_C, DEMO_V, 10e-3),  # 4e-6 F · 2500 V = 0.01 C = 10 mC
    (1e-6, 1000.0, 1e-3),     # 1e-6 · 1000 = 1 mC
    (3e-9, 15_100.0, 45.3e-6),  # 3e-9 · 15 100 = 45.3 µC
    (0.05e-6, 1000.0, 50e-6),   # 5e-8 · 1000 = 50 µC
])
def test_stored_charge_is_c_v(capacitance, voltage, coulombs):
    assert stored_charge(capacitance, voltage) == pytest.approx(coulombs, rel=REL, abs=0.0)


@pytest.mark.parametrize(("resistance", "capacitance", "seconds"), [
    (DEMO_R, DEMO_C, 8.8),    # 2.2e6 Ω · 4e-6 F = 8.8 s
    (1e5, 10e-6, 1.0),        # 1e5 · 1e-5 = 1 s
    (1e6, 10e-6, 10.0),       # 1e6 · 1e-5 = 10 s
    (1e9, 0.05e-6, 50.0),     # 1e9 · 5e-8 = 50 s
])
def test_time_constant_is_r_c(resistance, capacitance, seconds):
    assert time_constant(resistance, capacitance) == pytest.approx(seconds, rel=REL)


@pytest.mark.parametrize(("seconds", "volts"), [
    (0.0, 2500.0),                  # e^0 = 1
    (8.8, 2500.0 / math.e),         # one τ: 2500 / e ≈ 919.70 V
    (5.0, 1416.3865052),            # 2500 · e^(−5/8.8) = 2500 · 0.566555 ≈ 1416.39 V
    (17.6, 2500.0 / math.e ** 2),   # two τ: 2500 / e² ≈ 338.34 V
    (60.0, 2.7342692),              # 2500 · e^(−60/8.8) = 2500 · 0.00109371 ≈ 2.734 V
])
def test_voltage_after_demo_exciter(seconds, volts):
    assert voltage_after(DEMO_V, DEMO_R, DEMO_C, seconds) == pytest.approx(volts, rel=1e-8)


@pytest.mark.parametrize(("threshold", "seconds"), [
    (50.0, 34.4258024),     # 8.8 · ln(2500/50) = 8.8 · ln 50 = 8.8 · 3.912023 ≈ 34.43 s
    (60.0, 32.8213727),     # 8.8 · ln(2500/60) = 8.8 · ln 41.667 = 8.8 · 3.729701 ≈ 32.82 s
    (2500.0 / math.e, 8.8),  # down to V0/e takes exactly one τ
    (1250.0, 6.0996952),    # 8.8 · ln 2 = 8.8 · 0.693147 ≈ 6.100 s (half-voltage time)
])
def test_time_to_voltage_demo_exciter(threshold, seconds):
    assert time_to_voltage(DEMO_V, threshold, DEMO_R, DEMO_C) == pytest.approx(seconds, rel=1e-8)


def test_time_to_voltage_inverts_voltage_after():
    for threshold in (2000.0, 500.0, 60.0, 50.0, 1.0, 1e-3):
        t = time_to_voltage(DEMO_V, threshold, DEMO_R, DEMO_C)
        assert voltage_after(DEMO_V, DEMO_R, DEMO_C, t) == pytest.approx(threshold, rel=1e-12)


# --- against a numerical solution of the ODE ------------------------------------------------

@pytest.mark.parametrize(("initial_voltage", "resistance", "capacitance"), [
    (DEMO_V, DEMO_R, DEMO_C),   # demo exciter, τ = 8.8 s
    (1000.0, 1e5, 10e-6),       # τ = 1 s
    (20_000.0, 1e9, 1e-9),      # τ = 1 s at 20 kV
    (450.0, 5e6, 2e-6),         # τ = 10 s
])
def test_voltage_after_matches_solve_ivp(initial_voltage, resistance, capacitance):
    tau = resistance * capacitance
    times = np.array([0.0, 0.1, 0.5, 1.0, 2.0, 3.0, 5.0]) * tau
    solution = _discharge(initial_voltage, resistance, capacitance, times[-1], t_eval=times)
    assert solution.success
    for t, numeric in zip(solution.t, solution.y[0], strict=True):
        assert voltage_after(initial_voltage, resistance, capacitance, float(t)) == \
            pytest.approx(float(numeric), rel=ODE_REL)


@pytest.mark.parametrize(("initial_voltage", "threshold", "resistance", "capacitance"), [
    (DEMO_V, 50.0, DEMO_R, DEMO_C),
    (DEMO_V, 60.0, DEMO_R, DEMO_C),
    (1000.0, 60.0, 177e3, 10e-6),
    (20_000.0, 1.0, 1e9, 1e-9),
])
def test_time_to_voltage_matches_solve_ivp_event(initial_voltage, threshold, resistance,
                                                 capacitance):
    def crosses(t, v):
        return v[0] - threshold

    crosses.terminal = True    # type: ignore[attr-defined]
    crosses.direction = -1     # type: ignore[attr-defined]
    # Integrate well past the crossing; the terminal event stops the solver there.
    t_end = 50 * resistance * capacitance
    solution = _discharge(initial_voltage, resistance, capacitance, t_end, events=crosses)
    assert solution.status == 1          # stopped by the event, not by reaching t_end
    (event_time,) = solution.t_events[0]
    assert time_to_voltage(initial_voltage, threshold, resistance, capacitance) == \
        pytest.approx(float(event_time), rel=ODE_REL)


def test_energy_dissipated_in_bleed_resistor_equals_stored_energy():
    # Over a full discharge the resistor dissipates ∫ V²/R dt = ½CV0² (energy conservation).
    def rhs(t, y):
        v = y[0]
        return [-v / (DEMO_R * DEMO_C), v * v / DEMO_R]

    solution = solve_ivp(rhs, (0.0, 40 * DEMO_R * DEMO_C), [DEMO_V, 0.0], method="DOP853",
                         rtol=1e-10, atol=1e-12)
    assert solution.success
    assert float(solution.y[1][-1]) == pytest.approx(stored_energy(DEMO_C, DEMO_V), rel=1e-7)


# --- edge cases -----------------------------------------------------------------------------

@pytest.mark.parametrize("threshold", [DEMO_V, DEMO_V + 1e-9, 3000.0, 1e9])
def test_threshold_at_or_above_start_voltage_takes_no_time(threshold):
    assert time_to_voltage(DEMO_V, threshold, DEMO_R, DEMO_C) == 0.0


def test_zero_time_leaves_the_start_voltage():
    assert voltage_after(DEMO_V, DEMO_R, DEMO_C, 0.0) == DEMO_V


@pytest.mark.parametrize("seconds", [-1e-9, -1.0, -8.8, -math.inf])
def test_negative_time_is_refused(seconds):
    with pytest.raises(ValueError):
        voltage_after(DEMO_V, DEMO_R, DEMO_C, seconds)


def test_nan_time_is_refused():
    # A NaN time is no time at all; a NaN voltage would compare False with every limit.
    with pytest.raises(ValueError):
        voltage_after(DEMO_V, DEMO_R, DEMO_C, math.nan)


@pytest.mark.parametrize("bad", BAD_POSITIVE)
def test_bad_capacitance_is_refused_everywhere(bad):
    for call in (lambda: stored_energy(bad, DEMO_V),
                 lambda: stored_charge(bad, DEMO_V),
                 lambda: time_constant(DEMO_R, bad),
                 lambda: voltage_after(DEMO_V, DEMO_R, bad, 5.0),
                 lambda: time_to_voltage(DEMO_V, 50.0, DEMO_R, bad),
                 lambda: classify(bad, DEMO_V, DEMO_R)):
        with pytest.raises(ValueError):
            call()


@pytest.mark.parametrize("bad", BAD_POSITIVE)
def test_bad_resistance_is_refused_everywhere(bad):
    for call in (lambda: time_constant(bad, DEMO_C),
                 lambda: voltage_after(DEMO_V, bad, DEMO_C, 5.0),
                 lambda: time_to_voltage(DEMO_V, 50.0, bad, DEMO_C),
                 lambda: classify(DEMO_C, DEMO_V, bad)):
        with pytest.raises(ValueError):
            call()


@pytest.mark.parametrize("bad", BAD_POSITIVE)
def test_bad_resistance_or_capacitance_is_refused_even_when_already_below_threshold(bad):
    # The inputs are wrong whatever the voltages: the early "0 s" answer must not hide them.
    with pytest.raises(ValueError):
        time_to_voltage(50.0, 60.0, bad, DEMO_C)
    with pytest.raises(ValueError):
        time_to_voltage(50.0, 60.0, DEMO_R, bad)


@pytest.mark.parametrize("bad", BAD_POSITIVE)
def test_bad_resistance_is_refused_even_when_the_charge_is_exempt(bad):
    # 0.05 µF · 1000 V = 50 µC, exempt from the 5 s rule — but a bad resistance is still bad data.
    with pytest.raises(ValueError):
        classify(0.05e-6, 1000.0, bad)


@pytest.mark.parametrize("bad", [0.0, -60.0, math.nan, math.inf])
def test_bad_voltages_for_time_to_voltage_are_refused(bad):
    with pytest.raises(ValueError):
        time_to_voltage(bad, 50.0, DEMO_R, DEMO_C)
    with pytest.raises(ValueError):
        time_to_voltage(DEMO_V, bad, DEMO_R, DEMO_C)


def test_nan_voltage_is_not_classified_as_safe():
    # NaN fails every ">=" comparison, so without a check it would come out "no shock hazard".
    with pytest.raises(ValueError):
        classify(DEMO_C, math.nan, DEMO_R)


def test_decay_is_strictly_monotone():
    times = [0.0, 0.01, 0.5, 1.0, 5.0, 8.8, 20.0, 34.0, 60.0, 120.0]
    volts = [voltage_after(DEMO_V, DEMO_R, DEMO_C, t) for t in times]
    assert all(a > b for a, b in zip(volts, volts[1:], strict=False))
    assert all(v > 0 for v in volts)
    # Lower thresholds take strictly longer to reach.
    thresholds = [2000.0, 1000.0, 100.0, 60.0, 50.0, 1.0]
    waits = [time_to_voltage(DEMO_V, v, DEMO_R, DEMO_C) for v in thresholds]
    assert all(a < b for a, b in zip(waits, waits[1:], strict=False))


def test_larger_bleed_resistance_decays_slower():
    # τ grows with R: at 5 s the 22 MΩ case holds more than the 2.2 MΩ one.
    assert voltage_after(DEMO_V, 22e6, DEMO_C, 5.0) > voltage_after(DEMO_V, DEMO_R, DEMO_C, 5.0)


# --- classify() against the published thresholds -------------------------------------------

def test_demo_exciter_is_hazardous_on_every_count():
    # Shock hazard: 12.5 J ≥ 10 J at 2500 V ≥ 100 V
    #   (LBNL Electrical Safety Manual Table 2.2.13 (DOE classification)).
    # Over the accessible charge: 10 mC > 45 µC at 2500 V, inside 450 V – 15 kV
    #   (IEC 60335-1 §8.1.4, verified in a secondary copy).
    # Fails the machinery rule: V(5 s) = 2500 · e^(−5/8.8) ≈ 1416 V > 60 V, and 10 mC > 60 µC
    #   so not exempt (IEC 60204-1 §6.2.4).
    # The bleed resistor alone cannot make this exciter safe to touch in seconds: that is why
    # the approved data's wait and the grounding of the lead govern, not this estimate.
    assert classify(DEMO_C, DEMO_V, DEMO_R) == HazardClass(
        shock_hazard=True, over_accessible_charge=True, machinery_rule_met=False)
    assert voltage_after(DEMO_V, DEMO_R, DEMO_C, 5.0) == pytest.approx(1416.39, rel=1e-5)


# Capacitor shock hazard class: ≥ 100 V and ≥ 10 J
#   — LBNL Electrical Safety Manual Table 2.2.13 (DOE classification).
@pytest.mark.parametrize(("capacitance", "voltage", "hazard"), [
    # energy limit at 1000 V: ½ · C · 1e6 = 10 J at C = 20 µF
    (20.1e-6, 1000.0, True),    # ½ · 20.1e-6 · 1e6 = 10.05 J ≥ 10 J
    (19.9e-6, 1000.0, False),   # ½ · 19.9e-6 · 1e6 = 9.95 J < 10 J
    (20e-6, 1000.0, True),      # exactly 10 J: the limit is inclusive (≥)
    # voltage limit with energy far over 10 J: 1 F at ~100 V holds ~5000 J
    (1.0, 100.1, True),         # 100.1 V ≥ 100 V, ½ · 1 · 100.1² ≈ 5010 J
    (1.0, 99.9, False),         # 99.9 V < 100 V, though ½ · 1 · 99.9² ≈ 4990 J
    (2e-3, 100.0, True),        # exactly 100 V and ½ · 2e-3 · 1e4 = 10 J: both inclusive
    # both under
    (1e-6, 99.0, False),        # ½ · 1e-6 · 9801 ≈ 4.9 mJ
])
def test_shock_hazard_class(capacitance, voltage, hazard):
    assert classify(capacitance, voltage, 1e3).shock_hazard is hazard


# Accessible charge: 45 µC between 450 V and 15 kV; 350 mJ above 15 kV — IEC 60335-1 §8.1.4
# (verified in a secondary copy).
@pytest.mark.parametrize(("capacitance", "voltage", "over"), [
    (46e-9, 1000.0, True),      # 46e-9 · 1000 = 46 µC > 45 µC
    (44e-9, 1000.0, False),     # 44e-9 · 1000 = 44 µC ≤ 45 µC
    (0.11e-6, 450.0, True),     # 450 V is inside the band: 0.11e-6 · 450 = 49.5 µC > 45 µC
    (0.09e-6, 450.0, False),    # 0.09e-6 · 450 = 40.5 µC ≤ 45 µC
    (0.2e-6, 449.0, False),     # below 450 V the 45 µC limit does not apply (89.8 µC)
    (3.1e-9, 15_000.0, True),   # at 15 kV still the charge limit: 3.1e-9 · 15e3 = 46.5 µC
    (2.9e-9, 15_000.0, False),  # 2.9e-9 · 15e3 = 43.5 µC
    # above 15 kV the energy limit governs, not the charge:
    (1.8e-9, 20_000.0, True),   # ½ · 1.8e-9 · 4e8 = 0.36 J > 0.35 J
    (1.7e-9, 20_000.0, False),  # ½ · 1.7e-9 · 4e8 = 0.34 J ≤ 0.35 J
    (3e-9, 15_100.0, False),    # 45.3 µC > 45 µC but ½ · 3e-9 · 15100² ≈ 0.342 J ≤ 0.35 J
])
def test_accessible_charge_limit(capacitance, voltage, over):
    assert classify(capacitance, voltage, 1e3).over_accessible_charge is over


# Machinery discharge: residual > 60 V must fall to ≤ 60 V within 5 s; parts holding ≤ 60 µC
# exempt — IEC 60204-1 §6.2.4.
@pytest.mark.parametrize(("capacitance", "voltage", "resistance", "met"), [
    # 10 µF at 1000 V = 10 mC, not exempt. The limit τ is 5 / ln(1000/60) = 5 / 2.8134 ≈ 1.777 s.
    (10e-6, 1000.0, 1e5, True),     # fast bleed: τ = 1 s, V(5) = 1000 · e^−5 ≈ 6.7 V ≤ 60 V
    (10e-6, 1000.0, 1e6, False),    # slow bleed: τ = 10 s, V(5) = 1000 · e^−0.5 ≈ 606.5 V
    (10e-6, 1000.0, 177e3, True),   # τ = 1.77 s, V(5) = 1000 · e^(−5/1.77) ≈ 59.3 V ≤ 60 V
    (10e-6, 1000.0, 178e3, False),  # τ = 1.78 s, V(5) = 1000 · e^(−5/1.78) ≈ 60.3 V > 60 V
    # exempt by charge, however slow the bleed (τ = 1e9 · 5e-8 = 50 s, V(5) ≈ 905 V):
    (0.05e-6, 1000.0, 1e9, True),   # 0.05e-6 · 1000 = 50 µC ≤ 60 µC
    (0.06e-6, 1000.0, 1e9, True),   # 60 µC: the exemption is inclusive (≤)
    (0.061e-6, 1000.0, 1e9, False),  # 61 µC > 60 µC: not exempt, and 905 V > 60 V
    # the rule only concerns residuals above 60 V:
    (1.0, 60.0, 1e9, True),         # 60 V is already ≤ 60 V
    (1.0, 61.0, 1e9, False),        # 61 V, 61 C, τ = 1e9 s: still ~61 V at 5 s
])
def test_machinery_discharge_rule(capacitance, voltage, resistance, met):
    assert classify(capacitance, voltage, resistance).machinery_rule_met is met
