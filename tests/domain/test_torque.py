"""Torque readings (webapp.domain.torque, no app, no database): the wrench setting, the
lubricant factor, an adapter at its angle, the wrench's calibration, one reading per
fastener. Each expected value says where it comes from:

- 1 lbf·in = 0.1129848 N·m — NIST SP 811 Appendix B.9.
- In line: T_set = T_req·L/(L+E) — FAA AC 43.13-1B para 7-40, from memory; at an angle θ the
  moment arm is L + E·cos θ — statics, checked against numpy's cross product below.
- Limits, lubricants, bolt names and factors are demo data, invented.
"""

from __future__ import annotations

import numpy as np
import pytest
from pydantic import ValidationError

from webapp.domain import torque
from webapp.domain.errors import RuleRefusal
from webapp.domain.procedures import Torque
from webapp.domain.readings import InputProblem

REL = 1e-6          # against the published factors, which NIST rounds to 7 significant figures
EXACT = 1e-12       # exact by definition: only float rounding may separate the two


def test_an_adapter_lowers_the_wrench_setting_by_l_over_l_plus_e():
    # FAA AC 43.13-1B para 7-40, from memory: T_set = T_req·L/(L+E).
    # 275 × 12 / (12 + 2) = 3300 / 14 = 235.714 285 7… lbf·in
    assert torque.adapter_setting(275.0, 12.0, 2.0) == pytest.approx(3300 / 14, rel=EXACT)
    assert torque.adapter_setting(275.0, 12.0, 2.0) == pytest.approx(235.7142857, rel=REL)


def test_no_extension_leaves_the_required_torque():
    assert torque.adapter_setting(275.0, 12.0, 0.0) == 275.0


@pytest.mark.parametrize("length", [0.0, -12.0])
def test_a_wrench_length_of_zero_or_less_is_refused(length):
    with pytest.raises(InputProblem) as excinfo:
        torque.adapter_setting(275.0, length, 2.0)
    assert excinfo.value.field == "wrench_length"


def test_a_negative_extension_is_refused_at_the_extension_field():
    with pytest.raises(InputProblem) as excinfo:
        torque.adapter_setting(275.0, 12.0, -2.0)
    assert excinfo.value.field == "extension"


# --- 5. torque with its wrench and adapter ----------------------------------------------------

def _torque_step(adapter: bool = True) -> Torque:
    # Demo data, invented: limits, lubricant and wording of a plug torque step.
    return Torque.model_validate({
        "id": "torque-plug", "kind": "torque", "text": "Torque the igniter plug.",
        "unit": "lbf*in", "limits": {"min": 250, "max": 300},
        "lubricant": "anti-seize compound (demo)", "adapter": adapter})


def _torque_data(**overrides) -> dict:
    data = {"value": 275, "unit": "lbf*in"}
    data.update(overrides)
    return data


def test_a_torque_reading_keeps_the_setting_and_its_verdict():
    stored = torque.evaluate_torque(_torque_step(), _torque_data())
    assert stored["applied"] == 275.0
    assert stored["verdict"] == "within"
    assert stored["margin"] == 25.0
    assert "adapter" not in stored and "wrench_id" not in stored


def test_a_torque_in_newton_metres_is_judged_in_the_step_unit():
    # 31.07 N·m / 0.1129848 N·m per lbf·in (NIST SP 811 B.9) = 274.99… lbf·in
    stored = torque.evaluate_torque(_torque_step(), _torque_data(value=31.07, unit="N*m"))
    assert stored["applied"] == pytest.approx(31.07 / 0.1129848, rel=REL)
    assert stored["verdict"] == "within"


@pytest.mark.parametrize("value", [245, 305])
def test_a_torque_outside_the_step_limits_is_out_of_limits(value):
    stored = torque.evaluate_torque(_torque_step(), _torque_data(value=value))
    assert stored["verdict"] == "out of limits"
    assert stored["margin"] == -5.0


def test_an_adapter_reading_judges_the_applied_torque_not_the_wrench_setting():
    # FAA AC 43.13-1B para 7-40, from memory: applied = setting·(L+E)/L.
    setting = 275.0 * 12 / 14    # the corrected setting for 275 lbf·in, L = 12 in, E = 2 in
    stored = torque.evaluate_torque(
        _torque_step(), _torque_data(value=setting, adapter=IN_LINE))
    assert stored["applied"] == pytest.approx(275.0, rel=EXACT)
    assert stored["adapter"] == {"wrench_length": 12.0, "extension": 2.0, "angle": 0.0,
                                 "applied": pytest.approx(275.0, rel=EXACT)}
    assert stored["value"] == pytest.approx(setting, rel=EXACT)   # as the wrench was set
    assert stored["verdict"] == "within"


IN_LINE = {"wrench_length": 12, "extension": 2, "angle": 0}


def _lubricated_step() -> Torque:
    # Demo data, invented: a lubricant factor of 0.8 on the plug's 250-300 lbf·in.
    return _torque_step().model_copy(update={"lubricant_factor": 0.8})


@pytest.mark.parametrize(("value", "adapter", "applied", "verdict"), [
    (220.0, None, 275.0, "within"),                  # set to 275 × 0.8: 275 as the data means
    (275.0, None, 343.75, "out of limits"),          # the factor forgotten: 275 / 0.8
    # The page's setting with an adapter, 275 × 0.8 × 12 / 14 (FAA AC 43.13-1B para 7-40,
    # from memory, for L/(L+E)), judged back by the station as 275: one formula both ways.
    (275.0 * 0.8 * 12 / 14, IN_LINE, 275.0, "within"),
])
def test_the_station_applies_the_lubricant_factor_the_page_applies_to_the_setting(
        value, adapter, applied, verdict):
    data = _torque_data(value=value) if adapter is None else _torque_data(value=value,
                                                                           adapter=adapter)
    stored = torque.evaluate_torque(_lubricated_step(), data)
    assert stored["applied"] == pytest.approx(applied, rel=EXACT)
    assert stored["verdict"] == verdict and stored["lubricant_factor"] == 0.8


def test_an_uncorrected_setting_through_an_adapter_over_torques_the_plug():
    # Set to 275 with a 2 in extension on a 12 in wrench: 275 × 14 / 12 = 320.83 lbf·in applied.
    stored = torque.evaluate_torque(
        _torque_step(), _torque_data(value=275, adapter=IN_LINE))
    assert stored["applied"] == pytest.approx(275 * 14 / 12, rel=EXACT)
    assert stored["verdict"] == "out of limits"


def test_an_adapter_on_a_step_without_one_is_refused():
    with pytest.raises(InputProblem) as excinfo:
        torque.evaluate_torque(
            _torque_step(adapter=False),
            _torque_data(adapter=IN_LINE))
    assert excinfo.value.field == "adapter"


@pytest.mark.parametrize(("adapter", "field"), [
    ("12 in", "adapter"),
    ({"extension": 2, "angle": 0}, "wrench_length"),
    ({"wrench_length": 12, "angle": 0}, "extension"),
    ({"wrench_length": 12, "extension": 2}, "angle"),
    ({"wrench_length": 0, "extension": 2, "angle": 0}, "wrench_length"),
    ({"wrench_length": "NaN", "extension": 2, "angle": 0}, "wrench_length"),
    ({"wrench_length": 12, "extension": 2, "angle": 181}, "angle"),
    ({"wrench_length": 12, "extension": 2, "angle": -5}, "angle"),
    # Pointing back along the handle: L + E·cos θ = 12 − 10 = 2 in, under a quarter of L.
    ({"wrench_length": 12, "extension": 10, "angle": 180}, "angle"),
])
def test_an_adapter_without_a_usable_length_and_extension_is_refused(adapter, field):
    with pytest.raises(InputProblem) as excinfo:
        torque.evaluate_torque(_torque_step(), _torque_data(adapter=adapter))
    assert excinfo.value.field == field


# --- 6. readings: text, pass/fail, number with conditions, wear --------------------------------


# --- 7. an adapter at an angle; in-line only where the data says so ---------------------------

def _moment_about_fastener(force: float, length: float, extension: float,
                           angle_deg: float) -> float:
    """Physics, independent of the module: the moment about the fastener of a force square to
    the handle at the grip, as the z part of the cross product r × F (numpy), r from the
    fastener to the grip. The drive is at the origin, the handle along −x, the adapter at
    θ from +x."""
    theta = np.radians(angle_deg)
    fastener = np.array([extension * np.cos(theta), extension * np.sin(theta), 0.0])
    grip = np.array([-length, 0.0, 0.0])
    pull = np.array([0.0, -force, 0.0])   # square to the handle
    return float(abs(np.cross(grip - fastener, pull)[2]))


@pytest.mark.parametrize("angle", [0.0, 30.0, 45.0, 60.0, 90.0, 120.0, 150.0])
def test_the_setting_at_an_angle_gives_the_required_moment_at_the_fastener(angle):
    # Statics (textbook): the wrench clicks at F·L = setting; the fastener sees r × F.
    required, length, extension = 275.0, 12.0, 2.0
    setting = torque.wrench_setting(required, length, extension, angle)
    force = setting / length
    assert _moment_about_fastener(force, length, extension, angle) == pytest.approx(
        required, rel=1e-12)
    assert torque.applied_torque(setting, 1.0, (length, extension, angle)) == pytest.approx(
        required, rel=1e-12)


def test_square_to_the_wrench_an_adapter_changes_nothing_and_in_line_it_is_l_over_l_plus_e():
    # cos 90° = 0: the effective extension E·cos θ vanishes (textbook trigonometry).
    assert torque.wrench_setting(275.0, 12.0, 2.0, 90.0) == pytest.approx(275.0, rel=1e-12)
    assert torque.wrench_setting(275.0, 12.0, 2.0, 0.0) == pytest.approx(275 * 12 / 14,
                                                                          rel=EXACT)
    # cos 60° = 1/2 exactly: 275 × 12 / (12 + 1) = 253.846… lbf·in
    assert torque.wrench_setting(275.0, 12.0, 2.0, 60.0) == pytest.approx(3300 / 13, rel=1e-12)


def test_an_angled_reading_is_judged_with_the_effective_extension():
    # Set as if in line (275 × 12/14 = 235.71) but fitted at 90°: the plug gets 235.71 only,
    # below the 250 minimum, so it is out of limits, not within.
    stored = torque.evaluate_torque(
        _torque_step(), _torque_data(value=275 * 12 / 14, adapter={**IN_LINE, "angle": 90}))
    assert stored["applied"] == pytest.approx(275 * 12 / 14, rel=EXACT)
    assert stored["verdict"] == "out of limits"
    assert stored["adapter"]["angle"] == 90.0


def test_a_step_that_needs_the_adapter_in_line_refuses_an_angle():
    step = _torque_step().model_copy(update={"adapter_in_line": True})
    with pytest.raises(RuleRefusal) as excinfo:
        torque.evaluate_torque(step, _torque_data(adapter={**IN_LINE, "angle": 45}))
    assert excinfo.value.rule == "adapter_not_in_line"
    assert "45°" in excinfo.value.reason
    stored = torque.evaluate_torque(step, _torque_data(value=275 * 12 / 14, adapter=IN_LINE))
    assert stored["verdict"] == "within"


def test_an_in_line_requirement_without_an_adapter_is_refused_in_the_procedure():
    with pytest.raises(ValidationError, match="in-line adapter needs adapter"):
        _torque_step(adapter=False).model_validate(
            {**_torque_step(adapter=False).model_dump(), "adapter_in_line": True})


# --- 8. one reading per fastener --------------------------------------------------------------

BOLTS = ["bolt 1", "bolt 2", "bolt 3", "bolt 4"]   # demo names, invented


def _bolted() -> Torque:
    return _torque_step(adapter=False).model_copy(update={"fasteners": BOLTS})


def _entry(fastener: str, verdict: str, disposition: str | None = None) -> dict:
    return {"step": "torque-plug", "fastener": fastener, "verdict": verdict,
            "finding": {"disposition": disposition} if disposition else None}


def test_each_fastener_gets_its_own_reading_and_verdict():
    first = torque.evaluate_torque(_bolted(), _torque_data(value=275, fastener="bolt 1"))
    second = torque.evaluate_torque(_bolted(), _torque_data(value=320, fastener="bolt 2"),
                                    {"bolt 1"})
    assert (first["fastener"], first["verdict"]) == ("bolt 1", "within")
    assert (second["fastener"], second["verdict"]) == ("bolt 2", "out of limits")


@pytest.mark.parametrize("fastener", [None, "", "bolt 9", 2])
def test_a_reading_that_does_not_name_one_of_the_step_s_fasteners_is_refused(fastener):
    with pytest.raises(InputProblem) as excinfo:
        torque.evaluate_torque(_bolted(), _torque_data(fastener=fastener), {"bolt 1"})
    assert excinfo.value.field == "fastener"
    assert "bolt 2; bolt 3; bolt 4" in excinfo.value.message   # what is left to torque


def test_a_fastener_already_torqued_within_limits_is_refused_rather_than_torqued_again():
    with pytest.raises(RuleRefusal) as excinfo:
        torque.evaluate_torque(_bolted(), _torque_data(fastener="bolt 1"), {"bolt 1"})
    assert excinfo.value.rule == "fastener_done"


def test_a_fastener_on_a_one_fastener_step_is_refused():
    with pytest.raises(InputProblem) as excinfo:
        torque.evaluate_torque(_torque_step(), _torque_data(fastener="bolt 1"))
    assert excinfo.value.field == "fastener"


def test_a_fastener_stands_within_limits_or_deferred_and_its_latest_reading_counts():
    readings = [_entry("bolt 1", "within"), _entry("bolt 2", "out of limits", "replaced"),
                _entry("bolt 3", "out of limits", "deferred"), _entry("bolt 4", "within"),
                _entry("bolt 4", "out of limits")]   # re-torqued and found out: it waits
    assert torque.accepted_fasteners(_bolted(), readings) == {"bolt 1", "bolt 3"}
    readings.append(_entry("bolt 2", "near limit"))
    assert torque.accepted_fasteners(_bolted(), readings) == {"bolt 1", "bolt 2", "bolt 3"}


def test_a_procedure_names_each_fastener_once_and_two_or_more():
    base = _torque_step(adapter=False).model_dump()
    with pytest.raises(ValidationError, match="own name"):
        Torque.model_validate({**base, "fasteners": ["bolt 1", "bolt 1"]})
    with pytest.raises(ValidationError, match="two fasteners or more"):
        Torque.model_validate({**base, "fasteners": ["bolt 1"]})
