"""Readings with units and limits: conversions, refusals, verdicts, conditions, findings.

Pure unit tests of webapp.domain.readings (no app, no database). Every expected value says
where it comes from, with its status:

- Torque: 1 lbf·in = 0.1129848 N·m, 1 lbf·ft = 1.355818 N·m, 12 lbf·in = 1 lbf·ft exactly —
  NIST SP 811 Appendix B.9, verified in a secondary copy.
- 1 kgf·cm = 0.0980665 N·m — NIST SP 811 Appendix B.9 (exact:
  1 kgf = 9.80665 N by definition of standard gravity).
- 1 lbf = 4.4482216152605 N; 1 in = 0.0254 m exactly — NIST SP 811 / international yard and
  pound, textbook. 1 in = 25.4 mm exactly; 1 thou = 0.0254 mm — NIST SP 811, textbook.
- Temperature: t/°C = (t/°F − 32) / 1.8 — definition of the scale, textbook.
- Adapter: T_set = T_req·L/(L+E) — FAA AC 43.13-1B para 7-40, from memory.
- Spark counts, limits and tolerances below are demo data, invented.
"""

from __future__ import annotations

import math
from datetime import date

import pytest

from webapp.domain import readings
from webapp.domain.procedures import Reading
from webapp.domain.readings import InputProblem

REL = 1e-6          # against the published factors, which NIST rounds to 7 significant figures
EXACT = 1e-12       # exact by definition: only float rounding may separate the two
INCH_M = 0.0254     # 1 in = 0.0254 m exactly — NIST SP 811 / international yard and pound, textbook
TODAY = date(2026, 3, 16)  # a fixed day for the calibration checks


# --- 1. conversions against NIST SP 811 -----------------------------------------------------

@pytest.mark.parametrize(("value", "unit", "procedure_unit", "expected", "rel"), [
    # NIST SP 811 Appendix B.9, verified in a secondary copy: 1 lbf·in = 0.1129848 N·m
    (1, "lbf*in", "N*m", 0.1129848, REL),
    # NIST SP 811 Appendix B.9, verified in a secondary copy: 1 lbf·ft = 1.355818 N·m
    (1, "lbf*ft", "N*m", 1.355818, REL),
    # NIST SP 811 Appendix B.9, verified in a secondary copy: 12 lbf·in = 1 lbf·ft exactly
    (12, "lbf*in", "lbf*ft", 1.0, EXACT),
    (1, "lbf*ft", "lbf*in", 12.0, EXACT),
    # NIST SP 811 Appendix B.9: 1 kgf·cm = 0.0980665 N·m, exact by definition
    (1, "kgf*cm", "N*m", 0.0980665, EXACT),
    # NIST SP 811, textbook: 1 in = 25.4 mm exactly
    (1, "in", "mm", 25.4, EXACT),
    # NIST SP 811, textbook: 1 thou = 0.001 in = 0.0254 mm
    (1, "thou", "mm", 0.0254, EXACT),
    (25.4, "mm", "in", 1.0, EXACT),
])
def test_measure_converts_with_the_nist_sp_811_factors(value, unit, procedure_unit, expected,
                                                        rel):
    measured = readings.measure("value", value, unit, procedure_unit)
    assert measured.converted == pytest.approx(expected, rel=rel)


def test_a_pound_force_inch_in_newton_metres_over_an_inch_in_metres_is_the_exact_pound_force():
    # NIST SP 811 / international yard and pound, textbook: 1 lbf = 4.4482216152605 N,
    # 1 in = 0.0254 m exactly, so 1 lbf·in = 4.4482216152605 × 0.0254 N·m.
    measured = readings.measure("value", 1, "lbf*in", "N*m")
    assert measured.converted / INCH_M == pytest.approx(4.4482216152605, rel=EXACT)


@pytest.mark.parametrize(("value", "unit", "procedure_unit", "expected"), [
    # SI prefixes (NIST SP 811), textbook: m = 1e-3, k = 1e3, M = 1e6, G = 1e9
    (1, "Mohm", "ohm", 1e6),
    (1, "kohm", "ohm", 1e3),
    (1, "Gohm", "ohm", 1e9),
    (1, "mohm", "ohm", 1e-3),
    (2.2, "Gohm", "Mohm", 2200.0),
    (450, "kohm", "Mohm", 0.45),
    (1, "MΩ", "ohm", 1e6),
    (1, "kΩ", "ohm", 1e3),
    (1, "GΩ", "ohm", 1e9),
    (1, "mΩ", "ohm", 1e-3),
])
def test_resistance_prefixes_scale_by_powers_of_a_thousand(value, unit, procedure_unit,
                                                           expected):
    measured = readings.measure("value", value, unit, procedure_unit)
    assert measured.converted == pytest.approx(expected, rel=EXACT)


@pytest.mark.parametrize(("fahrenheit", "celsius"), [
    # Definition of the scale, textbook: t/°C = (t/°F − 32) / 1.8
    (68, 20.0),
    (32, 0.0),
    (-40, -40.0),
    (212, 100.0),
])
def test_fahrenheit_converts_to_celsius_by_the_definition_of_the_scale(fahrenheit, celsius):
    measured = readings.measure("ambient_temperature", fahrenheit, "degF", "degC",
                                "temperature")
    assert measured.converted == pytest.approx(celsius, rel=EXACT, abs=1e-9)


def test_the_temperature_dimension_is_found_from_the_procedure_unit():
    measured = readings.measure("ambient_temperature", 68, "degF", "degC")
    assert measured.converted == pytest.approx(20.0, rel=EXACT)


def test_measured_keeps_the_value_and_unit_as_entered_beside_the_converted_value():
    measured = readings.measure("value", 275, " lbf*in ", "N*m")
    assert (measured.value, measured.unit, measured.procedure_unit) == (275.0, "lbf*in", "N*m")
    assert measured.converted == pytest.approx(275 * 0.1129848, rel=REL)  # NIST SP 811 B.9
    assert measured.as_data() == {"value": 275.0, "unit": "lbf*in",
                                  "converted": measured.converted, "procedure_unit": "N*m"}


# --- 2. senseless input -----------------------------------------------------------------------

@pytest.mark.parametrize("raw", [
    "abc", "", "   ", "NaN", "nan", "inf", "-inf", "Infinity", "1.2.3", "12 mm",
    None, True, False, [37.5], {"value": 37.5}, math.nan, math.inf, -math.inf,
])
def test_a_value_that_is_not_a_finite_number_is_refused_at_the_value_field(raw):
    with pytest.raises(InputProblem) as excinfo:
        readings.measure("value", raw, "mm", "mm")
    assert excinfo.value.field == "value"


def test_the_refused_field_is_the_one_the_caller_names():
    with pytest.raises(InputProblem) as excinfo:
        readings.measure("test_voltage", "NaN", "V", "V", "voltage")
    assert excinfo.value.field == "test_voltage"
    assert excinfo.value.message


@pytest.mark.parametrize("unit", ["banana", "", "   ", None, 5, "Nm", "2"])
def test_a_unit_that_is_not_a_unit_is_refused_at_the_unit_field(unit):
    with pytest.raises(InputProblem) as excinfo:
        readings.measure("value", 275, unit, "lbf*in")
    assert excinfo.value.field == "value_unit"


@pytest.mark.parametrize("unit", ["lbf*", "*", "/", "(", "lbf)", "lbf*in/0"])
def test_a_malformed_unit_expression_is_an_input_problem_not_a_crash(unit):
    # Free-text units reach measure() from the API; a half-typed expression must come back as
    # a field to fix, like any other unit that is not a unit.
    with pytest.raises(InputProblem) as excinfo:
        readings.measure("value", 275, unit, "lbf*in")
    assert excinfo.value.field == "value_unit"


@pytest.mark.parametrize(("unit", "procedure_unit"), [
    ("mm", "lbf*in"),       # a length for a torque
    ("lbf", "lbf*in"),      # a force for a torque
    ("N*m", "mm"),          # a torque for a length
    ("degC", "Mohm"),       # a temperature for a resistance
    ("V", "Mohm"),          # a voltage for a resistance
])
def test_a_unit_of_the_wrong_dimension_is_refused_at_the_unit_field(unit, procedure_unit):
    with pytest.raises(InputProblem) as excinfo:
        readings.measure("value", 1, unit, procedure_unit)
    assert excinfo.value.field == "value_unit"


@pytest.mark.parametrize(("value", "unit", "procedure_unit"), [
    (1e9, "lbf*in", "lbf*in"),    # ~1.1e8 N·m, far beyond PLAUSIBLE["torque"]
    (2, "m", "mm"),               # beyond PLAUSIBLE["length"] (0.5 m)
    (2000, "mm", "mm"),
    (1e12, "V", "V"),
    (500, "degC", "degC"),        # beyond PLAUSIBLE["temperature"] for an ambient
])
def test_an_absurd_magnitude_is_refused_at_the_value_field(value, unit, procedure_unit):
    with pytest.raises(InputProblem) as excinfo:
        readings.measure("value", value, unit, procedure_unit)
    assert excinfo.value.field == "value"


def test_the_plausible_length_bound_itself_is_accepted():
    high_m = readings.PLAUSIBLE["length"][1]
    measured = readings.measure("value", high_m, "m", "mm")
    assert measured.converted == pytest.approx(high_m * 1000, rel=EXACT)


@pytest.mark.parametrize(("value", "unit"), [
    (-5, "lbf*in"), (-0.1, "N*m"), ("-1", "kgf*cm"),
])
def test_a_negative_torque_is_refused(value, unit):
    with pytest.raises(InputProblem) as excinfo:
        readings.measure("value", value, unit, "lbf*in")
    assert excinfo.value.field == "value"


@pytest.mark.parametrize(("value", "unit", "procedure_unit"), [
    (-0.1, "mm", "mm"), (-1, "Mohm", "Mohm"), (-28, "V", "V"), (-0.5, "A", "A"),
])
def test_negative_lengths_resistances_voltages_and_currents_are_refused(value, unit,
                                                                         procedure_unit):
    with pytest.raises(InputProblem) as excinfo:
        readings.measure("value", value, unit, procedure_unit)
    assert excinfo.value.field == "value"


def test_a_temperature_below_freezing_is_a_reading_not_a_negative_value():
    measured = readings.measure("ambient_temperature", -10, "degC", "degC")
    assert measured.converted == pytest.approx(-10.0, rel=EXACT)


@pytest.mark.parametrize(("raw", "expected"), [
    ("37,5", 37.5), (" 37,5 ", 37.5), ("37.5", 37.5), ("0,75", 0.75),
])
def test_a_comma_decimal_is_read_as_a_decimal_point(raw, expected):
    # Tablets set to many locales offer a comma as the decimal separator on their number
    # keypad: a mechanic typing "37,5" means 37.5, and refusing it would only slow the entry.
    measured = readings.measure("value", raw, "mm", "mm")
    assert measured.value == expected
    assert measured.converted == pytest.approx(expected, rel=EXACT)


# --- 3. verdict against limits ----------------------------------------------------------------

@pytest.mark.parametrize("value", [250.0, 300.0])
def test_exactly_at_a_limit_is_within_when_no_margin_is_set(value):
    judged = readings.verdict(value, 250.0, 300.0)
    assert (judged.verdict, judged.symbol, judged.margin) == ("within", "✓", 0.0)


@pytest.mark.parametrize("value", [250.0, 300.0])
def test_exactly_at_a_limit_is_near_limit_when_a_margin_is_set(value):
    judged = readings.verdict(value, 250.0, 300.0, near_margin=5.0)
    assert (judged.verdict, judged.symbol, judged.margin) == ("near limit", "▲", 0.0)


@pytest.mark.parametrize("value", [249.0, 301.0])
def test_one_unit_beyond_a_limit_is_out_of_limits_with_a_negative_margin(value):
    judged = readings.verdict(value, 250.0, 300.0, near_margin=5.0)
    assert (judged.verdict, judged.symbol, judged.margin) == ("out of limits", "✗", -1.0)


@pytest.mark.parametrize(("value", "margin"), [(253.0, 3.0), (255.0, 5.0), (296.0, 4.0)])
def test_inside_the_near_margin_is_near_limit(value, margin):
    judged = readings.verdict(value, 250.0, 300.0, near_margin=5.0)
    assert (judged.verdict, judged.symbol, judged.margin) == ("near limit", "▲", margin)


def test_beyond_the_near_margin_is_within_with_the_distance_to_the_nearer_limit():
    judged = readings.verdict(260.0, 250.0, 300.0, near_margin=5.0)
    assert (judged.verdict, judged.symbol, judged.margin) == ("within", "✓", 10.0)


@pytest.mark.parametrize(("value", "low", "high", "verdict", "margin"), [
    (50.0, 100.0, None, "out of limits", -50.0),    # insulation: a minimum only
    (5000.0, 100.0, None, "within", 4900.0),
    (1.6, None, 1.5, "out of limits", -0.1),        # erosion: a maximum only
    (0.4, None, 1.5, "within", 1.1),
])
def test_a_one_sided_limit_judges_against_its_only_bound(value, low, high, verdict, margin):
    judged = readings.verdict(value, low, high)
    assert judged.verdict == verdict
    assert judged.margin == pytest.approx(margin, rel=EXACT)


# --- 4. adapter correction --------------------------------------------------------------------

def _reading(**fields) -> Reading:
    return Reading.model_validate({"id": "read-1", "kind": "reading",
                                   "text": "Record the reading.", **fields})


TEXT_STEP = _reading(value="text")
PASS_FAIL_STEP = _reading(value="pass_fail")
# Demo data, invented: an insulation test with its conditions.
INSULATION_STEP = _reading(value="number", unit="Mohm", limits={"min": 100}, near_margin=50,
                           conditions=["test_voltage", "ambient_temperature", "humidity"])
# Demo data, invented: a plug erosion limit.
WEAR_STEP = _reading(value="number", unit="mm", limits={"max": 1.5}, wear=True)

CONDITIONS = {"test_voltage": {"value": "0,5", "unit": "kV"},
              "ambient_temperature": {"value": 68, "unit": "degF"},
              "humidity": {"value": 45}}
USAGE = {"engine_hours": 1200.5, "starts": 840, "continuous_ignition_hours": 35.0}


def test_a_text_reading_is_stored_trimmed_and_recorded():
    stored = readings.evaluate_reading(TEXT_STEP, {"text": "  light sooting on the shell "})
    assert stored == {"text": "light sooting on the shell", "verdict": "recorded"}


@pytest.mark.parametrize("text", [None, "", "   ", 42])
def test_an_empty_text_reading_is_refused(text):
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_reading(TEXT_STEP, {"text": text})
    assert excinfo.value.field == "text"


def test_a_text_reading_over_500_characters_is_refused_and_500_is_kept():
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_reading(TEXT_STEP, {"text": "x" * 501})
    assert excinfo.value.field == "text"
    assert readings.evaluate_reading(TEXT_STEP, {"text": "x" * 500})["text"] == "x" * 500


@pytest.mark.parametrize(("result", "verdict"), [("pass", "within"), ("fail", "out of limits")])
def test_pass_and_fail_map_to_within_and_out_of_limits(result, verdict):
    assert readings.evaluate_reading(PASS_FAIL_STEP, {"result": result}) == {
        "result": result, "verdict": verdict}


@pytest.mark.parametrize("result", [None, "", "PASS", "ok", True, 1])
def test_a_pass_fail_result_other_than_pass_or_fail_is_refused(result):
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_reading(PASS_FAIL_STEP, {"result": result})
    assert excinfo.value.field == "result"


def test_a_number_reading_stores_its_conditions_converted():
    stored = readings.evaluate_reading(INSULATION_STEP, {"value": "2,2", "unit": "GΩ",
                                                         **CONDITIONS})
    assert stored["converted"] == pytest.approx(2200.0, rel=EXACT)   # SI prefixes, textbook
    assert stored["verdict"] == "within"
    assert stored["margin"] == pytest.approx(2100.0, rel=EXACT)
    assert stored["test_voltage"]["converted"] == pytest.approx(500.0, rel=EXACT)
    # Definition of the scale, textbook: 68 °F = 20 °C
    assert stored["ambient_temperature"]["converted"] == pytest.approx(20.0, rel=EXACT)
    assert stored["humidity"] == {"value": 45.0, "unit": "%RH"}


@pytest.mark.parametrize(("value", "verdict"), [
    (120, "near limit"), (100, "near limit"), (99, "out of limits"), (151, "within"),
])
def test_a_number_reading_is_judged_with_the_step_near_margin(value, verdict):
    stored = readings.evaluate_reading(INSULATION_STEP, {"value": value, "unit": "Mohm",
                                                         **CONDITIONS})
    assert stored["verdict"] == verdict


@pytest.mark.parametrize("humidity", [-1, 100.5, 150, "NaN", None, "damp"])
def test_humidity_outside_0_to_100_or_not_a_number_is_refused(humidity):
    data = {"value": 500, "unit": "Mohm", **CONDITIONS, "humidity": {"value": humidity}}
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_reading(INSULATION_STEP, data)
    assert excinfo.value.field == "humidity"


@pytest.mark.parametrize(("humidity", "kept"), [(0, 0.0), (100, 100.0), ("37,5", 37.5)])
def test_humidity_from_0_to_100_inclusive_is_kept(humidity, kept):
    data = {"value": 500, "unit": "Mohm", **CONDITIONS, "humidity": {"value": humidity}}
    stored = readings.evaluate_reading(INSULATION_STEP, data)
    assert stored["humidity"] == {"value": kept, "unit": "%RH"}


@pytest.mark.parametrize("condition", ["test_voltage", "ambient_temperature", "humidity"])
def test_a_missing_condition_is_refused_at_its_field(condition):
    data = {"value": 500, "unit": "Mohm", **CONDITIONS}
    del data[condition]
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_reading(INSULATION_STEP, data)
    assert excinfo.value.field == condition


@pytest.mark.parametrize(("condition", "entry", "field"), [
    ("test_voltage", {"value": 500, "unit": "mm"}, "test_voltage_unit"),
    ("test_voltage", {"value": -500, "unit": "V"}, "test_voltage"),
    ("ambient_temperature", {"value": 20, "unit": "V"}, "ambient_temperature_unit"),
    ("ambient_temperature", {"value": "warm", "unit": "degC"}, "ambient_temperature"),
])
def test_a_condition_with_a_wrong_unit_or_value_is_refused_at_its_field(condition, entry,
                                                                          field):
    data = {"value": 500, "unit": "Mohm", **CONDITIONS, condition: entry}
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_reading(INSULATION_STEP, data)
    assert excinfo.value.field == field


def test_a_wear_reading_keeps_its_usage_and_the_estimated_flag():
    usage = {**USAGE, "continuous_ignition_estimated": True}
    stored = readings.evaluate_reading(WEAR_STEP, {"value": "0,6", "unit": "mm",
                                                   "usage": usage})
    assert stored["verdict"] == "within"
    assert stored["usage"] == {"engine_hours": 1200.5, "starts": 840,
                               "continuous_ignition_hours": 35.0,
                               "continuous_ignition_estimated": True}
    assert isinstance(stored["usage"]["starts"], int)


def test_a_wear_reading_without_the_flag_is_counted_not_estimated():
    stored = readings.evaluate_reading(WEAR_STEP, {"value": 0.6, "unit": "mm", "usage": USAGE})
    assert stored["usage"]["continuous_ignition_estimated"] is False


@pytest.mark.parametrize(("name", "raw"), [
    ("engine_hours", -1),
    ("starts", -3),
    ("continuous_ignition_hours", -0.5),
    ("engine_hours", "NaN"),
    ("continuous_ignition_hours", math.nan),
    ("starts", math.inf),
    ("starts", 12.5),
    ("starts", "840,5"),
    ("starts", None),
    ("engine_hours", True),
])
def test_usage_that_is_negative_not_finite_or_fractional_starts_is_refused(name, raw):
    usage = {**USAGE, name: raw}
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_reading(WEAR_STEP, {"value": 0.6, "unit": "mm", "usage": usage})
    assert excinfo.value.field == name


def test_a_wear_reading_without_usage_is_refused():
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_reading(WEAR_STEP, {"value": 0.6, "unit": "mm"})
    assert excinfo.value.field == "engine_hours"


# --- 7. findings ----------------------------------------------------------------------------

@pytest.mark.parametrize("disposition", ["replaced", "repaired", "re-tested"])
def test_a_finding_replaced_repaired_or_re_tested_needs_no_reference(disposition):
    stored = readings.evaluate_finding({"text": " plug shell eroded ", "disposition": disposition})
    assert stored == {"text": "plug shell eroded", "disposition": disposition}


def test_a_deferred_finding_keeps_its_reference_and_limit_and_opens_an_engine_item():
    stored = readings.evaluate_finding({"text": "lead braid frayed", "disposition": "deferred",
                                        "reference": " DD-0042 ", "limit": " 10 FH "})
    assert stored == {"text": "lead braid frayed", "disposition": "deferred",
                      "reference": "DD-0042", "limit": "10 FH",
                      "engine": [{"effect": "defer", "text": "lead braid frayed",
                                  "reference": "DD-0042", "limit": "10 FH"}]}


@pytest.mark.parametrize("limit", [None, "", "   ", "x" * 61])
def test_a_deferred_finding_without_a_limit_is_refused(limit):
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_finding({"text": "lead braid frayed", "disposition": "deferred",
                                   "reference": "DD-0042", "limit": limit})
    assert excinfo.value.field == "limit"


@pytest.mark.parametrize("reference", [None, "", "   "])
def test_a_deferred_finding_without_a_reference_is_refused(reference):
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_finding({"text": "lead braid frayed", "disposition": "deferred",
                                   "reference": reference})
    assert excinfo.value.field == "reference"


@pytest.mark.parametrize("disposition", [None, "", "fixed", "Replaced", "retested"])
def test_a_disposition_other_than_the_three_is_refused(disposition):
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_finding({"text": "plug shell eroded", "disposition": disposition})
    assert excinfo.value.field == "disposition"


@pytest.mark.parametrize("text", [None, "", "   "])
def test_a_finding_without_text_is_refused(text):
    with pytest.raises(InputProblem) as excinfo:
        readings.evaluate_finding({"text": text, "disposition": "replaced"})
    assert excinfo.value.field == "text"


# --- 8. spark counts --------------------------------------------------------------------------
