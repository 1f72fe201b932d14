"""Every demo scenario validates and gives the demo what it promises."""

from __future__ import annotations

from pathlib import Path

import pytest

from webapp.station.scenario import read_scenario

SCENARIOS = sorted((Path(__file__).resolve().parents[2] / "demo_scenarios").glob("*.yaml"))


@pytest.mark.parametrize("path", SCENARIOS, ids=lambda p: p.stem)
def test_scenario_validates_and_has_what_the_demo_needs(path):
    scenario = read_scenario(path)
    assert len(scenario.fleet) >= 3
    assert all(len(a.engines) == 2 for a in scenario.fleet)
    assert len({a.exciter.type for a in scenario.fleet}) >= 2
    assert {a.plug.type for a in scenario.fleet} == {"air-gap", "surface-discharge"}
    roles = [r for p in scenario.people for r in p.roles]
    assert roles.count("mechanic") >= 2
    assert {"supervisor", "trainer", "admin"} <= set(roles)


def test_demo_has_one_fast_wearing_plug():
    scenario = read_scenario(SCENARIOS[0])
    fast = scenario.plug_history[0].readings
    rate_fast = (fast[-1].erosion_mm - fast[0].erosion_mm) / (
        fast[-1].engine_hours - fast[0].engine_hours) * 100
    # Several times the ordinary wear (mm per 100 h): the winter of continuous ignition.
    assert rate_fast > 3 * scenario.ordinary_wear.mm_per_100_hours


def test_demo_loader_is_repeatable(demo_template, tmp_path):
    from webapp import store
    from webapp.clock import ManualClock
    from webapp.station.library import load_shop_library
    from webapp.station.scenario import load_scenario

    again = store.create(tmp_path / "again.db")
    load_shop_library(again, ManualClock()())
    load_scenario(again, read_scenario(SCENARIOS[0]), ManualClock()())
    first = store.connect(demo_template)
    columns = "component_id, measured_on, erosion_mm, engine_hours, starts"
    query = f"select {columns} from plug_wear_history order by id"
    assert list(first.query(query)) == list(again.query(query))
