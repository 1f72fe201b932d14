"""The supply a spark count was taken at, against its own limits."""

from __future__ import annotations

import pytest

from webapp.domain.procedures import Limits, SupplyLimits, TypeSupply
from webapp.domain.readings import InputProblem
from webapp.domain.supply import evaluate_supply, supply_kind


@pytest.mark.parametrize(("types", "kind"), [
    (("dc",), "dc"), (("transistorised",), "dc"), (("ac",), "ac"), (("ac", "dc"), "ac"),
    (("combination",), "dc")])
def test_the_supply_follows_the_exciter_type(types, kind):
    assert supply_kind(types) == kind


@pytest.mark.parametrize(("raw", "within"), [
    # MIL-STD-704F normal steady-state 28 V DC bus: 22-29 V (from memory)
    ({"voltage": "22"}, True), ({"voltage": "29"}, True), ({"voltage": "27,5"}, True),
    ({"voltage": "21.9"}, False), ({"voltage": "29.1"}, False)])
def test_a_dc_supply_is_judged_against_the_bus_s_normal_limits(raw, within):
    assert evaluate_supply(["dc"], raw, None)["within"] is within


@pytest.mark.parametrize(("raw", "within"), [
    # MIL-STD-704F normal steady-state 115 V 400 Hz bus: 108-118 V, 393-407 Hz (from memory)
    ({"voltage": "115", "frequency": "400"}, True),
    ({"voltage": "115", "frequency": "390"}, False),
    ({"voltage": "120", "frequency": "400"}, False)])
def test_an_ac_supply_is_judged_by_voltage_and_frequency(raw, within):
    stored = evaluate_supply(["ac"], raw, None)
    assert stored["within"] is within and stored["frequency"] == float(raw["frequency"])


def test_the_procedure_s_own_limits_replace_the_defaults():
    given = SupplyLimits(dc_volts=Limits(min=24.0, max=28.0))   # invented demo data
    assert evaluate_supply(["dc"], {"voltage": "23"}, given)["within"] is False
    assert evaluate_supply(["dc"], {"voltage": "23"}, None)["within"] is True


@pytest.mark.parametrize(("kind", "raw", "field"), [
    ("dc", None, "supply_voltage"), ("dc", {"voltage": "nan"}, "supply_voltage"),
    ("dc", {"voltage": "0"}, "supply_voltage"), ("ac", {"voltage": "115"}, "supply_frequency"),
    ("ac", {"voltage": "115", "frequency": "inf"}, "supply_frequency")])
def test_a_missing_or_senseless_supply_names_its_field(kind, raw, field):
    with pytest.raises(InputProblem) as problem:
        evaluate_supply([kind], raw, None)
    assert problem.value.field == field


# Per-type supply limits, as a procedure gives them (demo values, invented): a DC trembler
# unit's rate follows its supply voltage, so its band is narrower than the bus's.
PER_TYPE = SupplyLimits(dc=TypeSupply(volts=Limits(min=24.0, max=29.0)),
                        transistorised=TypeSupply(volts=Limits(min=20.0, max=30.0)),
                        ac=TypeSupply(volts=Limits(min=110.0, max=118.0)))


@pytest.mark.parametrize(("types", "volts", "within", "source"), [
    (["dc"], "23", False, "procedure, dc units"),           # below the trembler's 24 V
    (["transistorised"], "23", True, "procedure, transistorised units"),
    (["transistorised"], "29.5", True, "procedure, transistorised units"),
    # No entry for combination units and no dc_volts: the bus's normal 22-29 V
    # (MIL-STD-704F, from memory).
    (["combination"], "29.5", False, "station default (normal bus limits)"),
    (["combination"], "22", True, "station default (normal bus limits)"),
    # Both channels, one bus: the narrowest of the two types' bands (24-29 V).
    (["dc", "transistorised"], "23", False,
     "procedure, dc units; procedure, transistorised units")])
def test_each_exciter_type_is_judged_against_its_own_supply_limits(types, volts, within,
                                                                   source):
    stored = evaluate_supply(types, {"voltage": volts}, PER_TYPE)
    assert stored["within"] is within
    assert stored["limits_from"] == source
    assert stored["exciter_types"] == sorted(types)


def test_an_ac_type_entry_keeps_the_bus_frequency_limits_when_it_gives_none():
    # 393-407 Hz: MIL-STD-704F normal limits of a 400 Hz bus (from memory).
    stored = evaluate_supply(["ac"], {"voltage": "109", "frequency": "400"}, PER_TYPE)
    assert stored["within"] is False   # 109 V is below the AC entry's 110 V
    assert stored["frequency_limits"] == {"min": 393.0, "max": 407.0}
    assert evaluate_supply(["ac"], {"voltage": "115", "frequency": "408"}, PER_TYPE
                           )["within"] is False


def test_a_dc_type_entry_cannot_give_a_frequency():
    with pytest.raises(ValueError, match="hertz only under ac"):
        SupplyLimits.model_validate({"dc": {"volts": {"min": 24, "max": 29},
                                            "hertz": {"min": 393, "max": 407}}})
