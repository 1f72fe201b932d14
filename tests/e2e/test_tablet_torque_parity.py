"""The tablet's torque rules (static/js/tablet_torque.js) give the station's own verdicts and
words (webapp/domain/torque.py evaluate_torque, instruments.with_instrument), case for case,
in real Chromium: generated torque entries (fasteners named or not, some already done; the
setting in units of both dimensions; adapters at angles; lubricant factors; the register's
wrenches) judged by both."""

from __future__ import annotations

import json
import math
from datetime import date

import pytest
from hypothesis import strategies as st

from webapp.domain import instruments
from webapp.domain.errors import RuleRefusal
from webapp.domain.instruments import Instrument
from webapp.domain.procedures import Torque
from webapp.domain.readings import InputProblem
from webapp.domain.torque import evaluate_torque
from webapp.web.carry_steps import torque_form

from .parity import seeded

TODAY = date(2026, 12, 6)  # invented
REGISTER = [  # invented
    Instrument("TW-1", "torque wrench", 20, 100, "lbf*in", date(2027, 6, 30)),
    Instrument("TW-2", "torque wrench", 100, 600, "lbf*in", date(2027, 6, 30)),
    Instrument("TW-3", "torque wrench", 20, 100, "lbf*in", date(2026, 11, 15)),
    Instrument("TW-4", "torque wrench", 2, 12, "N*m", TODAY, "withdrawn"),
    Instrument("VM-1", "voltmeter", 0, 600, "V", date(2027, 6, 30)),
]
BOLTS = ["Bolt 1", "Bolt 2", "Bolt 3"]
steps = st.tuples(st.booleans(), st.sampled_from([None, 1.0, 0.8]),
                  st.sampled_from(["none", "any", "in line"]),
                  st.sampled_from([(35, 40), (None, 40), (35, None), (250, 300)]))
values = st.one_of(st.sampled_from(["35", "40", "37.5", "34.999", "40.0001", "4", "4.2",
                                    "300", "0", "-1", "abc", "", "1e9", "3,9"]),
                   st.floats(0, 700, allow_nan=False).map(lambda x: f"{x:.5g}"))
adapters = st.one_of(st.none(), st.tuples(st.sampled_from(["10", "12.5", "0", "-3", "x"]),
                                          st.sampled_from(["2", "0", "1.5", "8", "-1", ""]),
                                          st.sampled_from(["0", "90", "45", "180", "200", ""])))
cases = st.tuples(steps, st.sampled_from([None, "", "Bolt 1", "Bolt 2", "Bolt 9"]),
                  st.lists(st.sampled_from(BOLTS), max_size=2, unique=True), values,
                  st.sampled_from(["lbf*in", "lbf*in", "N*m", "kgf*cm", "lbf*ft", "mm", ""]),
                  adapters, st.sampled_from(["TW-1", "TW-2", "TW-3", "TW-4", "VM-1", "ZZ-1",
                                             ""]))


def _step(spec) -> Torque:
    fastened, factor, adapter, bounds = spec
    return Torque(id="t", kind="torque", text="Torque it.", unit="lbf*in",
                  limits={"min": bounds[0], "max": bounds[1]}, lubricant="Dry",
                  lubricant_factor=factor, adapter=adapter != "none",
                  adapter_in_line=adapter == "in line",
                  fasteners=BOLTS if fastened else [])


def _data(case) -> dict:
    _, fastener, _, value, unit, adapter, ident = case
    data: dict = {"value": value, "unit": unit}
    if fastener is not None:
        data["fastener"] = fastener
    if adapter is not None:
        data["adapter"] = dict(zip(("wrench_length", "extension", "angle"), adapter,
                                   strict=True))
    if ident:
        data["instrument_id"] = ident
    return data


def _station_says(step: Torque, data: dict, done: list[str]) -> dict:
    try:
        stored = evaluate_torque(step, data, set(done))
        register = {i.instrument_id: i for i in REGISTER}
        stored = instruments.with_instrument(step, data, stored,
                                             register.get(data.get("instrument_id", "")), TODAY)
    except InputProblem as problem:
        return {"refusal": problem.message}
    except RuleRefusal as refusal:
        return {"refusal": refusal.reason, "rule": refusal.rule}
    return {"stored": stored}


def _same(station: dict, tablet: dict) -> bool:
    if station.get("rule") == "instrument_unknown":
        return tablet.get("unknown") == "instrument"
    if "refusal" in station:
        return tablet.get("refusal") == station["refusal"]
    mine, theirs = tablet.get("stored") or {}, station["stored"]
    return (mine.get("verdict") == theirs["verdict"]
            and mine.get("fastener") == theirs.get("fastener")
            and all(math.isclose(mine[k], theirs[k], rel_tol=1e-9, abs_tol=1e-12)
                    for k in ("applied", "margin", "converted")))


@pytest.mark.browser
def test_the_tablets_torque_rules_give_the_stations_verdicts_in_its_words(tablet_page):
    generated = seeded(cases, 600)
    # Rare corners, always in: an adapter reaching back over the handle, one square to it.
    generated += [((False, None, "any", (35, 40)), None, [], "30", "lbf*in",
                   ("10", "8", "180"), "TW-1"),
                  ((True, 0.8, "any", (35, 40)), "Bolt 2", ["Bolt 1"], "30", "lbf*in",
                   ("12.5", "1.5", "90"), "TW-1")]
    torque_steps = [_step(c[0]) for c in generated]
    carried = [torque_form(s, REGISTER, TODAY) for s in torque_steps]
    datas = [_data(c) for c in generated]
    dones = [c[2] if c[0][0] else [] for c in generated]
    judged = tablet_page.evaluate(
        """([steps, datas, dones, today]) => steps.map((s, i) =>
             window.sparkwardTabletTorque.judge(s, datas[i], dones[i], today))""",
        [carried, datas, dones, TODAY.isoformat()])
    station = [_station_says(s, d, done) for s, d, done in zip(torque_steps, datas, dones,
                                                                strict=True)]
    differ = [(generated[i], judged[i], station[i]) for i in range(len(generated))
              if not _same(station[i], judged[i])]
    assert differ == [], json.dumps(differ[:3], indent=1, default=str)
    verdicts = {s["stored"]["verdict"] for s in station if "stored" in s}
    assert verdicts >= {"within", "out of limits"}
    rules = {s.get("rule") for s in station}
    assert rules >= {"fastener_done", "adapter_not_in_line", "instrument_out_of_range",
                     "instrument_out_of_calibration", "instrument_wrong_kind",
                     "instrument_not_in_service", "instrument_unknown"}
    words = " ".join(s.get("refusal", "") for s in station)
    for said in ("Choose the fastener", "leave the fastener out", "gives no adapter",
                 "reaches back over the handle", "is a unit of", "is not a number"):
        assert said in words, said
