"""Procedure data checks: discharge waits, duty cycles and limits that would be unsafe are refused.

Sources of the check values:
- the 60 s floor of a discharge wait: FAA-H-8083-32 (Powerplant handbook), ch. 4, turbine
  ignition — wait at least one minute after disconnecting the input (read in a secondary copy);
- a safe voltage of at most 60 V: IEC 60204-1 §6.2.4, residual voltage (read in a secondary copy);
- the exciter circuit ranges (0.1–100 µF, 100 V–30 kV, 1 kΩ–1 GΩ): from memory;
- the bleed-down time: physics, t = RC·ln(V0/Vsafe), checked against
  scipy.integrate.solve_ivp on dV/dt = −V/(RC).
Every capacitor and duty-cycle value below is invented for the tests.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from scipy.integrate import solve_ivp

from tests.domain.test_procedures import FILE, check_step, problems_in, procedure_text
from webapp.domain.procedure_files import parse_procedure

# The demo exciter (invented): 4 µF at 2.5 kV through 2.2 MΩ, safe at 50 V.
DEMO = {"capacitance": "4 uF", "charge_voltage": "2.5 kV", "bleed_resistance": "2.2 Mohm",
        "safe_voltage": "50 V"}
# Invented, chosen so the bleed-down outlasts a 2 min minimum:
# t = (10e-6 F · 10e6 Ω)·ln(2500/50) = 100 s · ln 50 ≈ 391.20 s.
SLOW = DEMO | {"capacitance": "10 uF", "bleed_resistance": "10 Mohm"}
SLOW_BLEED_S = 100 * math.log(50)
NULL = object()  # `minimum_reason:` written with no value


def discharge_wait(minimum: str = "2 min", capacitor: dict[str, str] | None = None,
                   reason: object = None) -> str:
    """A disconnection check (step 1) and a discharge wait (step 2, id `wait`)."""
    lines = ["- id: wait", "  kind: discharge_wait", "  text: Wait for the bleed-down.",
             f"  minimum: {minimum}"]
    if reason is NULL:
        lines.append("  minimum_reason:")
    elif reason is not None:
        lines.append(f"  minimum_reason: {json.dumps(reason)}")
    if capacitor is not None:
        lines.append("  capacitor:")
        lines += [f"    {name}: {value}" for name, value in capacitor.items()]
    return procedure_text(check_step("disconnect", power="removed"), "\n".join(lines))


def ignition_run(duty_cycle: str) -> str:
    """The gate check (step 1) and an ignition run (step 2, id `run`) with a duty cycle."""
    return procedure_text(check_step("gate", before_energising="true"), f"""
        - id: run
          kind: ignition_run
          text: Energise channel A.
          channel: A
          duty_cycle: {duty_cycle}
    """)


def fields_refused(text: str, step_id: str) -> list[str | None]:
    """The fields of every problem, each checked to be located in the file and the step."""
    problems = problems_in(text)
    for problem in problems:
        assert (problem.file, problem.step_number, problem.step_id) == (FILE, 2, step_id), problem
        assert problem.message
    return [problem.field for problem in problems]


def bleed_down_by_ode(capacitance: float, resistance: float, charge_v: float,
                      safe_v: float) -> float:
    """The time V(t) reaches `safe_v` on dV/dt = −V/(RC), integrated numerically."""
    def reaches_safe(t, v):
        return v[0] - safe_v
    reaches_safe.terminal = True  # type: ignore[attr-defined]
    solution = solve_ivp(lambda t, v: -v / (resistance * capacitance), (0.0, 1e6), [charge_v],
                         method="DOP853", rtol=1e-10, atol=1e-12, events=reaches_safe)
    return float(solution.t_events[0][0])


# --- discharge wait ------------------------------------------------------------------------

@pytest.mark.parametrize(("text", "fields"), [
    # FAA-H-8083-32 ch. 4: at least one minute, so 59 s and 30 s are short without a reason.
    (discharge_wait("59 s"), ["minimum"]),
    (discharge_wait("30 s", DEMO), ["minimum", "minimum"]),   # and under its 34.43 s bleed-down
    (discharge_wait("0.5 min"), ["minimum"]),
    # A reason must say something: blank, empty, or given with no value.
    (discharge_wait("30 s", reason="   "), ["minimum_reason", "minimum"]),
    (discharge_wait("2 min", reason=NULL), ["minimum_reason"]),
    (discharge_wait("2 min", reason=""), ["minimum_reason"]),
    # The data's minimum is shorter than the bleed-down (≈ 391.2 s, see SLOW).
    (discharge_wait("2 min", SLOW), ["minimum"]),
    (discharge_wait("391.2 s", SLOW), ["minimum"]),
    # IEC 60204-1 §6.2.4: a safe voltage is at most 60 V.
    (discharge_wait("2 min", DEMO | {"safe_voltage": "61 V"}), ["capacitor.safe_voltage"]),
    # Safe voltage not below the charge voltage (and then above 60 V as well).
    (discharge_wait("2 min", DEMO | {"safe_voltage": "3 kV"}),
     ["capacitor.safe_voltage", "capacitor.safe_voltage"]),
    (discharge_wait("2 min", DEMO | {"charge_voltage": "50 V"}),
     ["capacitor.charge_voltage", "capacitor.safe_voltage"]),
    # Outside the exciter ranges (from memory): a slip of digit or unit.
    (discharge_wait("2 min", DEMO | {"capacitance": "0.05 uF"}), ["capacitor.capacitance"]),
    (discharge_wait("2 min", DEMO | {"capacitance": "150 uF"}),
     ["capacitor.capacitance", "minimum"]),   # RC = 330 s: the bleed-down is 21.5 min too
    (discharge_wait("2 min", DEMO | {"charge_voltage": "40 kV"}), ["capacitor.charge_voltage"]),
    (discharge_wait("2 min", DEMO | {"bleed_resistance": "500 ohm"}),
     ["capacitor.bleed_resistance"]),
    (discharge_wait("2 min", DEMO | {"bleed_resistance": "2.2 Gohm"}),
     ["capacitor.bleed_resistance", "minimum"]),
    # Form, refused by the model: zero, negative, no unit, not a time.
    (discharge_wait("0 s"), ["minimum"]),
    (discharge_wait("-2 min"), ["minimum"]),
    (discharge_wait("2 min", DEMO | {"safe_voltage": "0 V"}), ["capacitor.safe_voltage"]),
    (discharge_wait("2 min", DEMO | {"capacitance": "4 uH"}), ["capacitor.capacitance"]),
])
def test_unsafe_discharge_data_is_refused_naming_the_field(text, fields):
    assert fields_refused(text, "wait") == fields


@pytest.mark.parametrize("text", [
    discharge_wait("2 min", DEMO),                         # the shipped demo exciter
    discharge_wait("60 s"),                                # exactly the floor
    discharge_wait("1 min", DEMO),
    discharge_wait("391.3 s", SLOW),                       # the figure the refusal shows
    discharge_wait("7 min", SLOW),
    discharge_wait("35 s", DEMO, reason="The approved data, 74-10-01 para 3.B, gives 35 s "
                                        "for this unit."),
    discharge_wait("2 min", DEMO, reason="Stated in the approved data."),
    # The range edges (inclusive), each with a minimum long enough for its bleed-down.
    discharge_wait("5 h", DEMO | {"capacitance": "0.1 uF"}),
    discharge_wait("5 h", DEMO | {"capacitance": "100 uF"}),
    discharge_wait("5 h", DEMO | {"charge_voltage": "100 V"}),
    discharge_wait("5 h", DEMO | {"charge_voltage": "30 kV"}),
    discharge_wait("5 h", DEMO | {"bleed_resistance": "1 kohm"}),
    discharge_wait("5 h", DEMO | {"bleed_resistance": "1 Gohm"}),
    discharge_wait("5 h", DEMO | {"safe_voltage": "60 V"}),
])
def test_safe_discharge_data_is_accepted(text):
    assert parse_procedure(text, FILE).steps[1].id == "wait"


def test_a_short_minimum_is_refused_with_both_figures():
    problem = problems_in(discharge_wait("2 min", SLOW))[0]
    assert "'2 min' (120 s)" in problem.message
    # t = 100 s · ln 50 = 391.202… s, shown rounded up to the tenth so the figure passes.
    assert "391.3 s" in problem.message
    assert str(problem).startswith(f"{FILE}, step 2 (wait), field 'minimum': ")


def test_a_wait_under_the_floor_is_refused_with_the_floor_and_the_way_out():
    problem = problems_in(discharge_wait("30 s"))[0]
    assert "'30 s'" in problem.message and "60 s" in problem.message
    assert "minimum_reason" in problem.message


@pytest.mark.parametrize(("capacitance", "resistance", "charge_v", "safe_v", "capacitor"), [
    (10e-6, 10e6, 2500.0, 50.0, SLOW),
    (4e-6, 20e6, 2500.0, 50.0, DEMO | {"bleed_resistance": "20 Mohm"}),
    (1e-6, 100e6, 20e3, 30.0, {"capacitance": "1 uF", "charge_voltage": "20 kV",
                               "bleed_resistance": "100 Mohm", "safe_voltage": "30 V"}),
])
def test_the_bleed_down_limit_agrees_with_the_ode(capacitance, resistance, charge_v, safe_v,
                                                 capacitor):
    t_ode = bleed_down_by_ode(capacitance, resistance, charge_v, safe_v)
    # physics: t = RC·ln(V0/V); the solver and the closed form agree to its tolerance.
    assert t_ode == pytest.approx(resistance * capacitance * math.log(charge_v / safe_v),
                                  rel=1e-7)
    assert t_ode > 60.0   # above the floor, so only the bleed-down decides
    # A part per million either side of the solver's time: refused below, accepted above.
    assert fields_refused(discharge_wait(f"{t_ode * (1 - 1e-6):.6f} s", capacitor),
                          "wait") == ["minimum"]
    parse_procedure(discharge_wait(f"{t_ode * (1 + 1e-6):.6f} s", capacitor), FILE)


# --- duty cycle ----------------------------------------------------------------------------

@pytest.mark.parametrize(("duty_cycle", "fields"), [
    ('{pattern: ["on 2 min", "off 0 s"]}', ["duty_cycle.pattern.1"]),
    ('{pattern: ["on 0 s", "off 3 min"]}', ["duty_cycle.pattern.0"]),
    ('{pattern: ["on -2 min", "off 3 min"]}', ["duty_cycle.pattern.0"]),
    ('{pattern: ["on 2 min", "off -3 min"]}', ["duty_cycle.pattern.1"]),
    ('{pattern: ["on 2 V", "off 3 min"]}', ["duty_cycle.pattern.0"]),     # not a time
    ('{pattern: ["on 2 m", "off 3 min"]}', ["duty_cycle.pattern.0"]),     # metres
    ('{pattern: ["on 2", "off 3 min"]}', ["duty_cycle.pattern.0"]),       # no unit
    ('{pattern: ["on 2 min", "off nan s"]}', ["duty_cycle.pattern.1"]),
    ('{pattern: ["on 2 min"]}', ["duty_cycle.pattern.0"]),                # no rest after
    ('{pattern: ["on 2 min", "off 3 min", "on 2 min"]}', ["duty_cycle.pattern.2"]),
    ('{pattern: ["on 2 min", "on 2 min", "off 3 min"]}', ["duty_cycle.pattern.1"]),
    ('{pattern: ["off 3 min"]}', ["duty_cycle.pattern"]),                 # never on
    ('{pattern: ["off 3 min", "off 2 min"]}', ["duty_cycle.pattern"]),
    ('{max_on: 0 min, min_off: 5 min}', ["duty_cycle.max_on"]),
    ('{max_on: 2 min, min_off: 0 s}', ["duty_cycle.min_off"]),
    ('{max_on: 2 min, min_off: -5 min}', ["duty_cycle.min_off"]),
    ('{max_on: 2 kg, min_off: 5 min}', ["duty_cycle.max_on"]),
    ('{max_on: 2 min, min_off: 5}', ["duty_cycle.min_off"]),
    ('{max_on: 2 min}', ["duty_cycle"]),                                  # no off-time
])
def test_unsafe_duty_cycle_is_refused_naming_the_field(duty_cycle, fields):
    assert fields_refused(ignition_run(duty_cycle), "run") == fields


@pytest.mark.parametrize("duty_cycle", [
    '{pattern: ["on 2 min", "off 3 min", "on 2 min", "off 23 min"]}',   # the shipped pattern
    '{pattern: ["on 90 s", "off 3 min"]}',
    '{pattern: ["off 1 min", "on 2 min", "off 3 min"]}',                # a rest first
    '{pattern: ["on 2 min", "off 1 min", "off 2 min"]}',                # rests add up
    '{max_on: 2 min, min_off: 5 min}',
    '{continuous: true}',
])
def test_safe_duty_cycle_is_accepted(duty_cycle):
    assert parse_procedure(ignition_run(duty_cycle), FILE).steps[1].id == "run"


def test_a_pattern_ending_on_says_the_exciter_must_rest():
    problem = problems_in(ignition_run('{pattern: ["on 2 min", "off 3 min", "on 2 min"]}'))[0]
    assert "'on 2 min'" in problem.message and "rest" in problem.message


# --- limits --------------------------------------------------------------------------------

def _with_limits(kind: str, limits: str) -> str:
    fields = {"reading": "value: number\n  unit: ohm",
              "torque": "unit: lbf*in\n  lubricant: none",
              "spark_count": "channel: A"}[kind]
    return procedure_text(check_step("first"), f"- id: measure\n  kind: {kind}\n"
                          f"  text: Measure.\n  {fields}\n  limits: {limits}\n")


KINDS = ["reading", "torque", "spark_count"]


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize(("limits", "fields"), [
    ("{min: 300, max: 250}", ["limits"]),          # low above high
    ("{min: 250, max: 250}", ["limits"]),          # no range at all
    ("{min: .nan, max: 250}", ["limits.min"]),
    ("{max: .inf}", ["limits.max"]),
    ("{min: -.inf, max: 30}", ["limits.min"]),
    ("{}", ["limits"]),                            # no bound
])
def test_limits_without_a_range_are_refused_naming_the_field(kind, limits, fields):
    assert fields_refused(_with_limits(kind, limits), "measure") == fields


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("limits", ["{min: 25, max: 30}", "{max: 2.5}", "{min: 55}",
                                    "{min: -5, max: 5}"])
def test_limits_with_low_below_high_are_accepted(kind, limits):
    assert parse_procedure(_with_limits(kind, limits), FILE).steps[1].id == "measure"


# --- all at once -----------------------------------------------------------------------------

def test_every_data_problem_of_a_file_is_reported_at_once():
    text = procedure_text(
        check_step("disconnect", power="removed"),
        "- id: wait\n  kind: discharge_wait\n  text: Wait.\n  minimum: 30 s\n",
        check_step("gate", before_energising="true"),
        '- id: run\n  kind: ignition_run\n  text: Run.\n  channel: A\n'
        '  duty_cycle: {pattern: ["on 2 min"]}\n')
    located = [(p.step_number, p.step_id, p.field) for p in problems_in(text)]
    assert located == [(2, "wait", "minimum"), (4, "run", "duty_cycle.pattern.0")]


def test_a_stored_revision_is_reread_without_the_data_rules_a_new_file_is_held_to_them():
    # A revision approved under earlier rules (here a 30 s wait with no reason) must stay
    # readable for the jobs that pinned it; a file checked or loaded now is refused.
    from webapp.domain.procedure_files import ProcedureInvalid, procedure_of_revision

    shipped = Path(__file__).resolve().parents[2] / "tasks" / "exciter-removal.yaml"
    text = shipped.read_text(encoding="utf-8").replace("minimum: 2 min", "minimum: 30 s")
    with pytest.raises(ProcedureInvalid):
        parse_procedure(text, "exciter-removal.yaml")
    assert procedure_of_revision("stored-under-earlier-rules", text).id == "exciter-removal"


def test_a_required_test_voltage_needs_the_reading_to_record_its_test_voltage():
    from webapp.domain.procedures import Reading

    with pytest.raises(ValueError, match="test_voltage"):
        Reading(id="ir", kind="reading", text="IR", value="number", unit="Mohm",
                limits={"min": 200}, test_voltage="1000 V")
    Reading(id="ir", kind="reading", text="IR", value="number", unit="Mohm",
            limits={"min": 200}, test_voltage="1000 V", conditions=["test_voltage"])
