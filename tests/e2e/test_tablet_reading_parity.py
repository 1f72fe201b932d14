"""The tablet's reading rules (static/js/tablet_reading.js) give the station's own verdicts
and words (webapp/domain: readings.evaluate_reading, isolation.isolation_verdict,
instruments.with_instrument), case for case, in real Chromium: generated readings (values as
typed, units of the right and the wrong dimension, limits with a min, a max or both, near
margins, instruments of the register) judged by both; the grounding window
(domain/isolation.py); and a part taken off (domain/parts.py), its fields and its plate
against the serial fitted."""

from __future__ import annotations

import json
import math
from datetime import UTC, date, datetime, timedelta

import pytest
from hypothesis import HealthCheck, given, seed, settings
from hypothesis import strategies as st

from webapp.domain import instruments, isolation
from webapp.domain.engine import EngineState, FittedPart, Position, position_key
from webapp.domain.errors import RuleRefusal
from webapp.domain.execution import JobState
from webapp.domain.gates import PowerOff
from webapp.domain.instruments import Instrument
from webapp.domain.parts import Whereabouts, evaluate_part
from webapp.domain.procedures import Check, PartChange, Reading
from webapp.domain.readings import InputProblem, evaluate_reading
from webapp.web.carry_steps import fitted_parts, lead_rules, reading_form

from .parity import seeded

TODAY = date(2026, 12, 6)  # the day both judge on (invented)
# An invented register: one of each state the station refuses, per kind asked for here.
REGISTER = [
    Instrument("VM-1", "voltmeter", 0, 600, "V", date(2027, 6, 30)),
    Instrument("VM-2", "voltmeter", 0, 600, "V", date(2026, 12, 5)),  # overdue yesterday
    Instrument("VM-3", "voltmeter", 0, 600, "V", date(2027, 6, 30), "quarantined"),
    Instrument("VM-4", "voltmeter", 0, 1, "kV", TODAY),  # due today: still in
    Instrument("IT-1", "insulation tester", 0.1, 20000, "Mohm", date(2027, 6, 30)),
    Instrument("MO-1", "milliohm meter", 0, 20, "ohm", date(2027, 6, 30)),
    Instrument("AM-1", "ammeter", 0, 20, "A", date(2027, 6, 30)),
    Instrument("EG-1", "erosion gauge", 0, 3, "mm", date(2027, 6, 30)),
]
IDS = [i.instrument_id for i in REGISTER] + ["ZZ-9", "", "bad id!"]

# (procedure unit, instrument kind, units typed: right and wrong dimension, odd spellings)
SETTINGS = [
    ("V", "voltmeter", ["V", "kV", "mm", "ohm", "A", "N*m", "", "   "]),
    ("Mohm", "insulation tester", ["Mohm", "Gohm", "kohm", "ohm", "mohm", "V", "degC"]),
    ("ohm", "milliohm meter", ["ohm", "mohm", "kohm", "in", "percent"]),
    ("A", "ammeter", ["A", "mA", "V", "thou"]),
    ("mm", "erosion gauge", ["mm", "in", "thou", "Mohm", "lbf*in"]),
]
numbers = st.one_of(
    st.floats(min_value=-5, max_value=700, allow_nan=False).map(lambda x: f"{x:.6g}"),
    st.integers(min_value=0, max_value=2_000_000).map(str),
    st.sampled_from(["0", "0.5", "0,5", " 1.5 ", "1e3", "1E-3", "1_000", "1__0", "_1", ".5",
                     "5.", "1.e2", "abc", "", "  ", "nan", "inf", "-Infinity", "1e400",
                     "+2", "1,000.5", "0x10", "0.49999", "0.5000001", "600", "600.0000001"]))
limits = st.one_of(
    st.tuples(st.floats(0, 50, allow_nan=False), st.none()),
    st.tuples(st.none(), st.floats(0.1, 500, allow_nan=False)),
    st.tuples(st.floats(0, 10, allow_nan=False), st.floats(10, 500, allow_nan=False)))
# A value typed close to a limit: (which limit, offset from it), in the procedure's unit.
near_limits = st.tuples(st.sampled_from([0, 1]),
                        st.sampled_from([-1.0, -0.04, -1e-9, 0.0, 1e-9, 0.03, 0.5, 2.0]))
cases = st.tuples(st.integers(0, len(SETTINGS) - 1), limits,
                  st.sampled_from([None, 0.0, 0.05, 1.0, 10.0]), st.booleans(),
                  st.one_of(numbers, near_limits),
                  st.integers(0, 7), st.sampled_from(IDS),
                  st.sampled_from(["number", "number", "number", "pass_fail", "text"]),
                  st.sampled_from(["pass", "fail", "", "maybe"]),
                  st.sampled_from(["ok", "", "   ", "x" * 501, "y" * 500]))


def _step(setting: int, bounds, near, isolating: bool, value_kind: str) -> Reading:
    unit, kind, _ = SETTINGS[setting]
    fields: dict = {"id": "r", "kind": "reading", "text": "Read it.", "value": value_kind}
    if value_kind == "number":
        fields.update(unit=unit, limits={"min": bounds[0], "max": bounds[1]},
                      near_margin=near)
    if value_kind != "text":
        fields["instrument"] = kind
    # An isolation check is a pass/fail, or volts with a max (procedure validation).
    if isolating and (value_kind == "pass_fail"
                      or (value_kind == "number" and unit == "V" and bounds[1] is not None)):
        fields["verifies"] = "isolation"
    return Reading(**fields)


def _data(case) -> dict:
    setting, bounds, _, _, value, unit_index, ident, value_kind, result, text = case
    units = SETTINGS[setting][2]
    if isinstance(value, tuple):
        which, offset = value
        limit = bounds[which] if bounds[which] is not None else bounds[1 - which]
        value, unit_index = repr(limit + offset), 0
    data: dict = {"value": value, "unit": units[unit_index % len(units)], "result": result,
                  "text": text}
    if ident:
        data["instrument_id"] = ident
    return data


def _station_says(step: Reading, data: dict) -> dict:
    try:
        stored = isolation.isolation_verdict(step, evaluate_reading(step, data))
        register = {i.instrument_id: i for i in REGISTER}
        stored = instruments.with_instrument(step, data, stored,
                                             register.get(str(data.get("instrument_id",
                                                                       "")).strip()), TODAY)
    except InputProblem as problem:
        return {"refusal": problem.message}
    except RuleRefusal as refusal:
        return {"refusal": refusal.reason, "rule": refusal.rule}
    return {"stored": stored}


def _same(station: dict, tablet: dict) -> bool:
    if station.get("rule") == "instrument_unknown":
        return tablet.get("unknown") == "instrument"  # the tablet leaves it to the station
    if "refusal" in station:
        return tablet.get("refusal") == station["refusal"]
    mine, theirs = tablet.get("stored"), station["stored"]
    if not mine or mine.get("verdict") != theirs["verdict"]:
        return False
    for key in ("margin", "converted"):
        if key in theirs and not math.isclose(mine[key], theirs[key], rel_tol=1e-9,
                                              abs_tol=1e-12):
            return False
    return mine.get("isolation") == theirs.get("isolation")


@pytest.mark.browser
def test_the_tablets_reading_rules_give_the_stations_verdicts_in_its_words(tablet_page):
    generated = seeded(cases, 600)
    steps = [_step(c[0], c[1], c[2], c[3], c[7]) for c in generated]
    carried = [{**reading_form(s, REGISTER, TODAY), "id": s.id} for s in steps]
    datas = [_data(c) for c in generated]
    judged = tablet_page.evaluate(
        """([steps, datas, today]) => steps.map((s, i) =>
             window.sparkwardTabletReading.judge(s, datas[i], today))""",
        [carried, datas, TODAY.isoformat()])
    station = [_station_says(s, d) for s, d in zip(steps, datas, strict=True)]
    differ = [(generated[i], datas[i], judged[i], station[i]) for i in range(len(generated))
              if not _same(station[i], judged[i])]
    assert differ == [], json.dumps(differ[:3], indent=1, default=str)
    # Every outcome was met: each verdict, refusals, and IDs left to the station.
    verdicts = {s["stored"]["verdict"] for s in station if "stored" in s}
    assert verdicts >= {"within", "near limit", "out of limits", "recorded"}
    rules = {s.get("rule") for s in station}
    assert rules >= {"instrument_wrong_kind", "instrument_not_in_service",
                     "instrument_out_of_calibration", "instrument_out_of_range",
                     "instrument_unknown"}
    words = " ".join(s.get("refusal", "") for s in station)
    for said in ("is not a number", "is a unit of", "Choose the unit", "not a plausible",
                 "not a finite number", "Choose pass or fail", "Write what you read",
                 "is not an instrument ID"):
        assert said in words, said


@pytest.mark.browser
def test_a_value_exactly_at_a_limit_is_within_on_the_tablet_as_at_the_station(tablet_page):
    for bounds, near, value in (((None, 0.5), None, "0.5"), ((0.5, None), None, "0.5"),
                                ((1, 2), 0.0, "2"), ((1, 2), 0.1, "1.1"), ((1, 2), 0.1, "2.1")):
        step = Reading(id="r", kind="reading", text="Read it.", value="number", unit="V",
                       limits={"min": bounds[0], "max": bounds[1]}, near_margin=near)
        data = {"value": value, "unit": "V"}
        tablet = tablet_page.evaluate(
            "([s, d]) => window.sparkwardTabletReading.judge(s, d, '2026-12-06')",
            [{**reading_form(step, [], TODAY)}, data])
        station = evaluate_reading(step, data)
        assert tablet["stored"]["verdict"] == station["verdict"], (bounds, near, value)


NOW = datetime(2026, 12, 6, 9, 30, tzinfo=UTC)
GROUNDING = Check(id="ground", kind="check", text="Ground it.", grounds_lead=True)
STEPS = [Check(id="handle", kind="check", text="Handle it.", handles_lead=True),
         Check(id="open", kind="check", text="Take it off.", disturbs=["lead_at_exciter"]),
         Check(id="plain", kind="check", text="Look at it.")]


@pytest.mark.browser
def test_the_grounding_window_is_the_stations_on_the_tablet(tablet_page):
    ages = [None, 0, 1, 60, 899, 900, 900.5, 901, 1800, 3725.2]
    for step in STEPS:
        for age in ages:
            grounded = None if age is None else PowerOff(NOW - timedelta(seconds=age), None)
            state = JobState(procedure=None, configuration=None,  # type: ignore[arg-type]
                             applicable=(GROUNDING, step), lead_grounded=grounded)
            try:
                isolation.check_lead_grounded(state, step, NOW, None)
                station = None
            except RuleRefusal as refusal:
                station = refusal.reason
            tablet = tablet_page.evaluate(
                "([s, at, now, valid]) => window.sparkwardTabletLead.groundingRefusal("
                "s, at, now, valid)",
                [lead_rules(step), grounded.station.isoformat() if grounded else None,
                 NOW.timestamp() * 1000, isolation.GROUNDING_VALID_S])
            assert tablet == station, (step.id, age)


FITTED = FittedPart(part_number="XEX-1001-03", serial="EX-40417", type="dc")  # invented
texts = st.sampled_from(["XEX-1001-03", "EX-40417", " EX-40417 ", "EX-40418", "", "  ",
                         "Z" * 60, "Z" * 61, "bad\tline"])
figures = st.sampled_from(["1200", "1200.5", "0", "-1", "200001", "abc", "", "1,5", "1e3",
                           "nan", "12.5"])
# Mostly good entries, so that matches and mismatches are met as often as refusals.
part_numbers = st.one_of(st.just("XEX-1001-03"), st.just("XEX-1001-04"), texts)
serials = st.one_of(st.just("EX-40417"), st.just(" EX-40417 "), st.just("EX-40418"), texts)
good = st.sampled_from(["1200", "950", "12.5"])
part_cases = st.tuples(part_numbers, serials,
                       st.sampled_from(["unserviceable", "serviceable", "", "broken"]),
                       st.sampled_from(["failed", "scheduled", "robbed", "", "lost"]),
                       st.one_of(st.just("U-1"), texts), st.one_of(good, figures),
                       st.one_of(st.just("950"), figures), st.one_of(st.just(""), figures))


@pytest.mark.browser
def test_a_part_taken_off_is_judged_on_the_tablet_as_the_station_judges_it(tablet_page):
    generated = seeded(part_cases, 300)
    step = PartChange(id="off", kind="part", text="Take it off.", action="remove",
                      part="exciter")
    engine = EngineState(positions={position_key("exciter", "A"): Position(
        "exciter", "A", fitted=FITTED)})
    fields = [dict(zip(("part_number", "serial", "status", "reason", "tag", "engine_hours",
                        "starts", "continuous_ignition_hours"), case, strict=True))
              for case in generated]
    view = {"state": {"fitted": fitted_parts(engine, ["A"])}, "carried": {"channel": "A"}}
    judged = tablet_page.evaluate(
        """([view, step, all]) => all.map(f => window.sparkwardTabletPart.judgeRemoval(
             view, step, Object.assign({}, f, { usage: { engine_hours: f.engine_hours,
               starts: f.starts, continuous_ignition_hours: f.continuous_ignition_hours } })))""",
        [view, {"part": "exciter"}, fields])
    outcomes = set()
    for case, tablet in zip(fields, judged, strict=True):
        data = {k: case[k] for k in ("part_number", "serial", "status", "reason", "tag")}
        data["usage"] = {k: case[k] for k in ("engine_hours", "starts",
                                              "continuous_ignition_hours")}
        try:
            stored = evaluate_part(step, data, "A", engine, (), Whereabouts())
        except (InputProblem, RuleRefusal) as problem:
            said = problem.message if isinstance(problem, InputProblem) else problem.reason
            assert tablet.get("refusal") == said, (case, tablet)
            outcomes.add("refused")
            continue
        assert tablet.get("matches") == (stored["verdict"] == "matches"), (case, tablet)
        outcomes.add(stored["verdict"])
    assert outcomes == {"refused", "matches", "mismatch"}


INSULATION = Reading(id="ir", kind="reading", text="Measure it.", value="number", unit="Mohm",
                     limits={"min": 200}, near_margin=50, instrument="insulation tester",
                     conditions=["test_voltage", "ambient_temperature", "humidity"],
                     test_voltage="1000 V")  # demo values, as tasks/ (invented)
condition_cases = st.tuples(
    st.sampled_from(["1000", "1", "1.04", "949", "1051", "500", "abc", "", "200000"]),
    st.sampled_from(["V", "kV", "mm", ""]),
    st.sampled_from(["21.5", "70", "-100", "x", "300"]),
    st.sampled_from(["degC", "degF", "V"]),
    st.sampled_from(["45", "0", "100", "101", "-1", "wet", ""]),
    st.sampled_from(["250", "240", "190", "600"]), st.sampled_from(["Mohm", "Gohm"]))


@pytest.mark.browser
def test_the_conditions_of_an_insulation_reading_are_judged_as_the_station_does(tablet_page):
    generated = seeded(condition_cases, 250)
    datas = [{"value": value, "unit": unit, "instrument_id": "IT-1",
              "test_voltage": {"value": tv, "unit": tv_unit},
              "ambient_temperature": {"value": temp, "unit": temp_unit},
              "humidity": {"value": rh, "unit": "%RH"}}
             for tv, tv_unit, temp, temp_unit, rh, value, unit in generated]
    carried = reading_form(INSULATION, REGISTER, TODAY)
    judged = tablet_page.evaluate(
        """([step, datas, today]) => datas.map(d =>
             window.sparkwardTabletReading.judge(step, d, today))""",
        [carried, datas, TODAY.isoformat()])
    station = [_station_says(INSULATION, d) for d in datas]
    differ = [(d, t, s) for d, t, s in zip(datas, judged, station, strict=True)
              if not _same(s, t)]
    assert differ == [], json.dumps(differ[:3], indent=1, default=str)
    words = " ".join(s.get("refusal", "") for s in station)
    for said in ("the approved data's test voltage", "Relative humidity is between",
                 "not a plausible temperature", "is a unit of"):
        assert said in words, said
    assert any("stored" in s for s in station)  # and readings taken with every condition


@pytest.mark.browser
def test_numbers_in_the_stations_words_are_written_as_python_writes_them(tablet_page):
    @seed(20261206)
    @settings(max_examples=400, deadline=None, database=None,
              suppress_health_check=[HealthCheck.function_scoped_fixture])
    @given(st.lists(st.one_of(st.floats(allow_nan=False, allow_infinity=False),
                              st.integers(-10**9, 10**9).map(float),
                              st.floats(-1e-3, 1e-3)), min_size=1, max_size=20))
    def check(values):
        # Exact ties at the sixth digit (1234565) are rounded to even, as Python does.
        values = values + [1234565.0, 1234575.0, 0.5, 2.5e-05, 100000.0, 1e16, -0.0, 600.0]
        tablet = tablet_page.evaluate(
            "vs => vs.map(v => window.sparkwardTabletReading.formatG(v))", values)
        assert tablet == [f"{v:g}" for v in values]

    check()
