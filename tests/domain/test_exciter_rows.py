"""Combination units' modes, and step data by exciter part number (a table with a default).

Limits, part numbers and energy ratings here are demo data, invented. The rate of a timed
count is N / T × 60 (the definition of a rate, textbook); E = ½CV² and t = RC·ln(V0/V)
are textbook physics.
"""

from __future__ import annotations

import math

import pytest

from webapp.domain import exciter_rows, gates, spark_counts
from webapp.domain.procedure_files import ProcedureInvalid, parse_procedure
from webapp.domain.procedures import DischargeWait, Limits, SparkCount
from webapp.domain.readings import InputProblem

TABLE = {"default": {"min": 55, "max": 95},
         "by_part_number": {"XEX-2040-01": {"min": 60, "max": 100}}}   # invented


def _count(**fields):
    return SparkCount.model_validate({"id": "count-a", "kind": "spark_count",
                                      "text": "Count unit A.", "channel": "A", **fields})


START = _count(mode="start", rated_energy="12 J", limits={"min": 55, "max": 95},
               when={"exciter_types": ["combination"]})
CONTINUOUS = _count(mode="continuous", rated_energy="2 J", limits={"min": 40, "max": 80},
                    when={"exciter_types": ["combination"]})
TIMED = {"method": "timed", "window_s": 30}


@pytest.mark.parametrize(("part_numbers", "limits", "source"), [
    (["XEX-2040-01"], (60, 100), "XEX-2040-01"),
    (["XEX-1001-03"], (55, 95), "default"),
    (["XEX-2040-01", "XEX-2040-01"], (60, 100), "XEX-2040-01"),
    # Two exciters on different rows: the narrowest of both (highest min, lowest max).
    (["XEX-2040-01", "XEX-1001-03"], (60, 95), "narrowest of XEX-2040-01 and default"),
    # Not known which is fitted: the narrowest of every row.
    ([None], (60, 95), exciter_rows.UNKNOWN), ([], (60, 95), exciter_rows.UNKNOWN)])
def test_the_row_for_the_fitted_part_number_or_the_default(part_numbers, limits, source):
    step = _count(limits=TABLE)
    chosen = exciter_rows.limits_for(step.limits, part_numbers)
    assert (chosen.limits.min, chosen.limits.max) == limits
    assert chosen.source == source


def test_one_row_of_limits_is_the_procedure_s_for_every_part_number():
    chosen = exciter_rows.limits_for(Limits(min=55, max=95), ["XEX-2040-01"])
    assert chosen.source == "procedure" and chosen.limits.max == 95


def test_a_count_is_judged_against_its_row_and_stores_where_it_came_from():
    step = _count(limits=TABLE)
    # 29 in 30 s = 58/min (±2): within the default row 55-95, below the 60-100 row.
    row = exciter_rows.limits_for(step.limits, ["XEX-2040-01"])
    stored = spark_counts.evaluate_spark_count(step, {**TIMED, "count": 29}, {}, row)
    assert stored["rate"] == 58.0
    assert stored["verdict"] == "out of limits"
    assert stored["limits"] == {"min": 60.0, "max": 100.0}
    assert stored["limits_from"] == "XEX-2040-01"
    default = exciter_rows.limits_for(step.limits, ["XEX-1001-03"])
    stored = spark_counts.evaluate_spark_count(step, {**TIMED, "count": 35}, {}, default)
    assert stored["verdict"] == "within" and stored["limits_from"] == "default"


@pytest.mark.parametrize(("step", "count", "verdict"), [
    # 36 in 30 s = 72/min ±2: within start 55-95 and within continuous 40-80.
    (START, 36, "within"), (CONTINUOUS, 36, "within"),
    # 45 in 30 s = 90/min ±2: within the start mode's 55-95, above the continuous 40-80.
    (START, 45, "within"), (CONTINUOUS, 45, "out of limits")])
def test_each_mode_is_judged_against_its_own_limits(step, count, verdict):
    stored = spark_counts.evaluate_spark_count(step, {**TIMED, "count": count,
                                                      "mode": step.mode}, {})
    assert stored["verdict"] == verdict
    assert stored["mode"] == step.mode


@pytest.mark.parametrize(("step", "said"), [
    (START, "continuous"), (CONTINUOUS, "start"), (START, None), (START, ""),
    (START, "boost"), (_count(limits={"min": 55, "max": 95}), "start")])
def test_a_count_in_a_mode_the_step_is_not_for_is_refused(step, said):
    data = {**TIMED, "count": 36} | ({} if said is None else {"mode": said})
    with pytest.raises(InputProblem) as problem:
        spark_counts.evaluate_spark_count(step, data, {})
    assert problem.value.field == "mode"


def test_the_both_channels_check_compares_counts_of_the_same_mode_only():
    from webapp.domain.execution import Configuration, JobState
    from webapp.domain.procedures import Procedure  # noqa: F401 - the state needs one
    readings = (
        {"kind": "spark_count", "step": "a-start", "channel": "A", "mode": "start",
         "rate": 72.0, "resolution": 2.0},
        {"kind": "spark_count", "step": "a-cont", "channel": "A", "mode": "continuous",
         "rate": 50.0, "resolution": 2.0},
        {"kind": "spark_count", "step": "b-start", "channel": "B", "mode": "start",
         "rate": 68.0, "resolution": 2.0})
    state = JobState(None, Configuration(None, ("combination",), ("air-gap",)), (),  # type: ignore[arg-type]
                     readings=readings)
    assert state.single_channel_rates("start") == {"A": (72.0, 2.0), "B": (68.0, 2.0)}
    assert state.single_channel_rates("continuous") == {"A": (50.0, 2.0)}
    assert state.single_channel_rates() == {}


def test_a_mode_belongs_to_a_combination_step():
    with pytest.raises(ValueError, match="combination units only"):
        _count(mode="start", limits={"min": 55, "max": 95})
    with pytest.raises(ValueError, match="combination units only"):
        _count(mode="start", limits={"min": 55, "max": 95}, when={"exciter_types": ["dc"]})
    with pytest.raises(ValueError, match="joules"):
        _count(mode="start", rated_energy="12 N*m", limits={"min": 55, "max": 95},
               when={"exciter_types": ["combination"]})


# Invented capacitor rows. Bleed-down t = RC·ln(V0/Vsafe) (textbook):
# default 4 µF, 2.2 MΩ, 2500 V → 50 V: 8.8 s × ln 50 = 34.43 s;
# XEX-2040-01 10 µF, 4.7 MΩ, 3000 V → 50 V: 47 s × ln 60 = 192.43 s.
CAPACITORS = {"default": {"capacitance": "4 uF", "charge_voltage": "2.5 kV",
                          "bleed_resistance": "2.2 Mohm", "safe_voltage": "50 V"},
              "by_part_number": {"XEX-2040-01": {
                  "capacitance": "10 uF", "charge_voltage": "3 kV",
                  "bleed_resistance": "4.7 Mohm", "safe_voltage": "50 V"}}}
WAIT = DischargeWait.model_validate({"id": "discharge", "kind": "discharge_wait",
                                     "text": "Wait.", "minimum": "4 min",
                                     "capacitor": CAPACITORS})


@pytest.mark.parametrize(("part_numbers", "seconds", "source", "energy_j"), [
    (["XEX-1001-03"], 8.8 * math.log(50), "default", 0.5 * 4e-6 * 2500 ** 2),
    (["XEX-2040-01"], 47.0 * math.log(60), "XEX-2040-01", 0.5 * 10e-6 * 3000 ** 2),
    ([None], 47.0 * math.log(60), "XEX-2040-01", 0.5 * 10e-6 * 3000 ** 2)])
def test_a_discharge_wait_takes_the_capacitor_row_of_the_fitted_exciter(
        part_numbers, seconds, source, energy_j):
    need = gates.discharge_requirement(WAIT, part_numbers)
    assert need.computed_s == pytest.approx(seconds, rel=1e-9)
    assert need.capacitor_from == source
    assert need.energy_j == pytest.approx(energy_j, rel=1e-12)
    assert need.required_s == 240.0   # the data's 4 min is longer than either bleed-down


PROCEDURE = """
id: demo-check
title: Demo check
ata: 74-00
kind: functional check
channel: all
source: {document: Demo manual (invented), section: 74-00, revision: Rev 1}
effectivity: {engine_models: [QT-610], exciter_types: [dc, combination], plug_types: [air-gap]}
preliminary: {conditions: none, tools: none, supplies: none, spares: none, safety: none}
after_completion: none
steps:
"""


def _procedure_problems(steps: str) -> list[str]:
    try:
        parse_procedure(PROCEDURE + steps, "demo-check.yaml")
    except ProcedureInvalid as invalid:
        return [str(p) for p in invalid.problems]
    return []


@pytest.mark.parametrize(("row", "said"), [
    ("XEX-1: {min: 95, max: 55}", "above max"),
    ("XEX-2: {min: 70, max: 70}", "both 70"),
])
def test_the_validator_checks_each_row_of_a_table_like_the_default(row, said):
    problems = _procedure_problems(f"""
  - id: count-a
    kind: spark_count
    text: Count A.
    channel: A
    limits:
      default: {{min: 55, max: 95}}
      by_part_number:
        {row}
""")
    part = row.split(":")[0]
    assert any(f"limits.by_part_number.{part}" in p and said in p for p in problems), problems


def test_the_validator_checks_each_capacitor_row():
    problems = _procedure_problems("""
  - id: power-off
    kind: check
    power: removed
    text: Disconnect the input.
  - id: discharge
    kind: discharge_wait
    text: Wait.
    minimum: 2 min
    capacitor:
      default: {capacitance: 4 uF, charge_voltage: 2.5 kV, bleed_resistance: 2.2 Mohm,
                safe_voltage: 50 V}
      by_part_number:
        XEX-9: {capacitance: 4 F, charge_voltage: 2.5 kV, bleed_resistance: 2.2 Mohm,
                safe_voltage: 50 V}
""")
    assert any("capacitor.by_part_number.XEX-9.capacitance" in p for p in problems), problems
    assert not any("capacitor.default" in p for p in problems), problems


def test_the_validator_wants_both_modes_of_a_combination_unit():
    problems = _procedure_problems("""
  - id: count-a-start
    kind: spark_count
    text: Count A in the start mode.
    channel: A
    mode: start
    when: {exciter_types: [combination]}
    limits: {min: 55, max: 95}
""")
    assert any("not in the continuous mode" in p for p in problems), problems
