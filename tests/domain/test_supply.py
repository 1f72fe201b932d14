"""The supply a spark count was taken at, against its own limits."""

from __future__ import annotations

import pytest

from webapp.domain.procedures import Limits, SupplyLimits
from webapp.domain.readings import InputProblem
from webapp.domain.supply import evaluate_supply, supply_kind


@pytest.mark.parametrize(("types", "kind"), [
    (("dc",), "dc"), (("transistorised",), "dc"), (("ac",), "ac"), (("ac", "dc"), "ac")])
def test_the_supply_follows_the_exciter_type(types, kind):
    assert supply_kind(types) == kind


@pytest.mark.parametrize(("raw", "within"), [
    # MIL-STD-704F normal steady-state 28 V DC bus: 22-29 V (from memory)
    ({"voltage": "22"}, True), ({"voltage": "29"}, True), ({"voltage": "27,5"}, True),
    ({"voltage": "21.9"}, False), ({"voltage": "29.1"}, False)])
def test_a_dc_supply_is_judged_against_the_bus_s_normal_limits(raw, within):
    assert evaluate_supply("dc", raw, None)["within"] is within


@pytest.mark.parametrize(("raw", "within"), [
    # MIL-STD-704F normal steady-state 115 V 400 Hz bus: 108-118 V, 393-407 Hz (from memory)
    ({"voltage": "115", "frequency": "400"}, True),
    ({"voltage": "115", "frequency": "390"}, False),
    ({"voltage": "120", "frequency": "400"}, False)])
def test_an_ac_supply_is_judged_by_voltage_and_frequency(raw, within):
    stored = evaluate_supply("ac", raw, None)
    assert stored["within"] is within and stored["frequency"] == float(raw["frequency"])


def test_the_procedure_s_own_limits_replace_the_defaults():
    given = SupplyLimits(dc_volts=Limits(min=24.0, max=28.0))   # invented demo data
    assert evaluate_supply("dc", {"voltage": "23"}, given)["within"] is False
    assert evaluate_supply("dc", {"voltage": "23"}, None)["within"] is True


@pytest.mark.parametrize(("kind", "raw", "field"), [
    ("dc", None, "supply_voltage"), ("dc", {"voltage": "nan"}, "supply_voltage"),
    ("dc", {"voltage": "0"}, "supply_voltage"), ("ac", {"voltage": "115"}, "supply_frequency"),
    ("ac", {"voltage": "115", "frequency": "inf"}, "supply_frequency")])
def test_a_missing_or_senseless_supply_names_its_field(kind, raw, field):
    with pytest.raises(InputProblem) as problem:
        evaluate_supply(kind, raw, None)
    assert problem.value.field == field
