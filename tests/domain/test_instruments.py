"""The register's instruments: entries, and whether one may take a reading (kind, status,
calibration on the day, range with pint conversions).

Sources of the check values:
- NIST SP 811 Appendix B.9: 1 lbf·in = 0.1129848 N·m; 1 lbf·ft = 1.355818 N·m (12 lbf·in
  exactly); 1 kgf·cm = 0.0980665 N·m (exact: 1 kgf = 9.80665 N).
- NIST SP 811 Appendix B.8 / international yard and pound: 1 in = 25.4 mm exactly.
- SI prefixes (NIST SP 811 section 4.3): 1 GΩ = 1000 MΩ, 1 Ω = 1000 mΩ.
- Calibration due today is still in, due yesterday is out: common practice, no source.
Every ID, range and date below is invented.
"""

from __future__ import annotations

from datetime import date, timedelta

import pytest
from pydantic import ValidationError

from tests.domain.gate_events import _removal_at_discharge
from webapp.domain import instruments
from webapp.domain.errors import RuleRefusal
from webapp.domain.instruments import Instrument
from webapp.domain.procedures import Reading, Torque
from webapp.domain.readings import InputProblem

TODAY = date(2026, 12, 1)
WRENCH = Instrument("TW-1", "torque wrench", 20.0, 100.0, "lbf*in", TODAY)
METER = Instrument("MO-1", "milliohm meter", 0.0, 20.0, "ohm", TODAY + timedelta(days=90))
GAUGE = Instrument("EG-1", "erosion gauge", 0.0, 3.0, "mm", TODAY + timedelta(days=90))
TESTER = Instrument("IT-1", "insulation tester", 0.1, 20000.0, "Mohm",
                    TODAY + timedelta(days=90))


def _use(instrument, kind="torque wrench", value=(50.0, "lbf*in"), today=TODAY,
         named=None):
    return instruments.check_use(instrument, {"instrument_id": named or (
        instrument.instrument_id if instrument else "XX-1")}, kind, today, value)


# --- calibration on the day -----------------------------------------------------------------

def test_an_instrument_due_today_is_still_in_calibration():
    # common practice, no source: the due date is the last day it may be used
    kept = _use(WRENCH, today=WRENCH.calibration_due)
    assert kept == {"id": "TW-1", "kind": "torque wrench", "range": "20–100 lbf*in",
                    "range_low": 20, "range_high": 100, "range_unit": "lbf*in",
                    "calibration_due": TODAY.isoformat()}


def test_an_instrument_due_yesterday_is_refused():
    # common practice, no source: the day after the due date it is out of calibration
    with pytest.raises(RuleRefusal) as refused:
        _use(WRENCH, today=WRENCH.calibration_due + timedelta(days=1))
    assert refused.value.rule == "instrument_out_of_calibration"
    assert TODAY.isoformat() in refused.value.reason


# --- unknown, wrong kind, out of service ------------------------------------------------------

def test_an_id_not_in_the_register_is_refused_with_its_id():
    with pytest.raises(RuleRefusal) as refused:
        _use(None, named="TW-404")
    assert refused.value.rule == "instrument_unknown"
    assert "TW-404" in refused.value.reason


@pytest.mark.parametrize("typed", [None, "", "   ", 7, "TW 1 with spaces", "x" * 41])
def test_a_missing_or_malformed_id_is_refused_at_its_field(typed):
    with pytest.raises(InputProblem) as problem:
        instruments.check_use(WRENCH, {"instrument_id": typed}, "torque wrench", TODAY, None)
    assert problem.value.field == "instrument_id"


def test_an_instrument_of_another_kind_is_refused():
    with pytest.raises(RuleRefusal) as refused:
        _use(METER, kind="torque wrench")
    assert refused.value.rule == "instrument_wrong_kind"
    assert "milliohm meter" in refused.value.reason


@pytest.mark.parametrize("status", ["quarantined", "withdrawn"])
def test_an_instrument_out_of_service_is_refused(status):
    with pytest.raises(RuleRefusal) as refused:
        _use(Instrument("TW-2", "torque wrench", 20, 100, "lbf*in", TODAY, status))
    assert refused.value.rule == "instrument_not_in_service"
    assert status in refused.value.reason


# --- range, converted to the instrument's unit ------------------------------------------------

@pytest.mark.parametrize(("value", "unit", "inside"), [
    (100, "lbf*in", True), (20, "lbf*in", True),          # the ends are in the range
    (100.01, "lbf*in", False), (19.99, "lbf*in", False),
    # NIST SP 811 B.9: 100 lbf·in = 11.29848 N·m; 11.30 N·m = 100.013 lbf·in
    (11.29848, "N*m", True), (11.30, "N*m", False),
    # 20 lbf·in = 2.259696 N·m: 2.26 N·m is 20.0027 lbf·in, 2.25 N·m is 19.914 lbf·in
    (2.26, "N*m", True), (2.25, "N*m", False),
    # 1 lbf·ft = 12 lbf·in exactly: 8.3 lbf·ft = 99.6 lbf·in, 8.4 lbf·ft = 100.8 lbf·in
    (8.3, "lbf*ft", True), (8.4, "lbf*ft", False),
    # 1 kgf·cm = 0.0980665 N·m = 0.867962 lbf·in: 115 kgf·cm = 99.82, 116 = 100.68 lbf·in
    (115, "kgf*cm", True), (116, "kgf*cm", False),
])
def test_a_torque_wrench_setting_is_judged_in_the_wrench_unit(value, unit, inside):
    if inside:
        assert _use(WRENCH, value=(value, unit))["id"] == "TW-1"
    else:
        with pytest.raises(RuleRefusal) as refused:
            _use(WRENCH, value=(value, unit))
        assert refused.value.rule == "instrument_out_of_range"
        assert "20–100 lbf*in" in refused.value.reason


@pytest.mark.parametrize(("instrument", "kind", "value", "unit", "inside"), [
    # 1 Ω = 1000 mΩ (SI prefix): 20 000 mΩ is the top of a 0–20 Ω meter
    (METER, "milliohm meter", 20000, "mohm", True),
    (METER, "milliohm meter", 20001, "mohm", False),
    # 1 in = 25.4 mm exactly: 0.118 in = 2.9972 mm, 0.119 in = 3.0226 mm
    (GAUGE, "erosion gauge", 0.118, "in", True),
    (GAUGE, "erosion gauge", 0.119, "in", False),
    # 1 GΩ = 1000 MΩ: 20 GΩ is the top of a 0.1–20 000 MΩ tester; 0.05 MΩ is under its bottom
    (TESTER, "insulation tester", 20, "Gohm", True),
    (TESTER, "insulation tester", 21, "Gohm", False),
    (TESTER, "insulation tester", 0.05, "Mohm", False),
])
def test_other_kinds_are_judged_in_their_own_unit(instrument, kind, value, unit, inside):
    assert instruments.in_range(instrument, value, unit) is inside


def test_a_value_of_another_dimension_is_never_in_range():
    # Cannot be compared, so the conservative answer: out of range.
    assert instruments.in_range(WRENCH, 50, "V") is False
    assert instruments.in_range(WRENCH, 50, "not-a-unit") is False


# --- what each step needs ---------------------------------------------------------------------

def test_a_torque_step_needs_a_torque_wrench_and_a_reading_names_its_kind():
    step = Torque.model_validate({"id": "t", "kind": "torque", "text": "Torque it.",
                                  "unit": "lbf*in", "limits": {"min": 25, "max": 30},
                                  "lubricant": "dry"})
    assert instruments.required_kind(step) == "torque wrench"
    reading = Reading.model_validate({"id": "r", "kind": "reading", "text": "Read it.",
                                      "value": "number", "unit": "mohm",
                                      "limits": {"max": 2.5}, "instrument": "milliohm meter"})
    assert instruments.required_kind(reading) == "milliohm meter"
    bare = Reading.model_validate({"id": "r", "kind": "reading", "text": "Look.",
                                   "value": "pass_fail"})
    assert instruments.required_kind(bare) is None


@pytest.mark.parametrize(("value", "unit", "instrument"), [
    ("number", "mm", "voltmeter"), ("text", None, "erosion gauge"),
    ("number", "V", "hammer")])
def test_a_procedure_step_whose_instrument_cannot_take_it_is_refused(value, unit, instrument):
    with pytest.raises(ValidationError) as wrong:
        Reading.model_validate({"id": "r", "kind": "reading", "text": "Read it.",
                                "value": value, "unit": unit, "instrument": instrument,
                                **({"limits": {"max": 1}} if unit else {})})
    error = wrong.value.errors()[0]
    assert error["loc"] == ("instrument",) or error.get("ctx", {}).get("field") == "instrument"


def test_a_reading_without_the_instrument_it_needs_is_refused_at_its_field():
    job = _removal_at_discharge(disconnected_at_s=100)
    job.done("discharge", at_s=220)
    with pytest.raises(InputProblem) as problem:
        job.record("reading_recorded", "verify-isolation", {"value": "0.02", "unit": "V"},
                   at_s=240)
    assert problem.value.field == "instrument_id"
    stored = job.record("reading_recorded", "verify-isolation",
                        {"value": "0.02", "unit": "V", "instrument_id": "VM-1"}, at_s=250)
    assert stored["data"]["instrument"]["id"] == "VM-1"


# --- entries of the register ------------------------------------------------------------------

GOOD = {"instrument_id": "TW-9", "kind": "torque wrench", "range_low": "20",
        "range_high": "100", "range_unit": "lbf*in", "calibration_due": "2027-01-31"}


def test_a_good_entry_becomes_an_instrument_in_service():
    entry = instruments.check_entry(**GOOD)
    assert entry == Instrument("TW-9", "torque wrench", 20.0, 100.0, "lbf*in",
                               date(2027, 1, 31))


@pytest.mark.parametrize(("field", "value"), [
    ("instrument_id", ""), ("kind", "hammer"), ("range_low", "low"), ("range_low", "-1"),
    ("range_high", "10"), ("range_unit", "V"), ("range_unit", "furlongs per"),
    ("calibration_due", "2027-02-30"), ("status", "lost")])
def test_a_bad_entry_is_refused_at_its_field(field, value):
    with pytest.raises(InputProblem) as problem:
        instruments.check_entry(**{**GOOD, field: value})
    assert problem.value.field == field


def test_a_calibration_sets_a_new_due_date_and_returns_a_quarantined_instrument():
    quarantined = instruments.taken_out(WRENCH, "quarantined")
    again = instruments.calibrated(quarantined, "2027-12-01", TODAY)
    assert (again.status, again.calibration_due) == ("in service", date(2027, 12, 1))
    with pytest.raises(InputProblem) as past:
        instruments.calibrated(WRENCH, TODAY - timedelta(days=1), TODAY)
    assert past.value.field == "calibration_due"
    withdrawn = instruments.taken_out(WRENCH, "withdrawn")
    with pytest.raises(InputProblem):
        instruments.calibrated(withdrawn, "2027-12-01", TODAY)
    with pytest.raises(InputProblem):
        instruments.taken_out(withdrawn, "quarantined")
