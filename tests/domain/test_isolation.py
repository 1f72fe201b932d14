"""Isolation verified after a lockout, and the high-tension lead grounded before handling, as
pure rules through a job's events and as the procedure validator's structure rules.

Sources:
- 29 CFR 1910.147(d)(6): before work starts on equipment locked or tagged out, the person
  verifies that isolation and de-energisation have been accomplished.
- 29 CFR 1910.147(d)(5)(ii): where stored energy can re-accumulate, verification continues
  until the work is done (here: the lead grounded again after a pause).
- The grounding window (15 min) is a station choice: common practice, no source.
- The 0.5 V isolation limit of the demo procedures: common practice, no source.

Every time, person and value below is invented demo data (the QT-610 is fictional).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.domain.gate_events import _Job, _removal_at_discharge, _t
from tests.domain.test_procedures import FILE, check_step, problems_in, procedure_text
from webapp.domain import isolation
from webapp.domain.procedure_files import parse_procedure

TASKS = Path(__file__).resolve().parents[2] / "tasks"
PLUG = parse_procedure((TASKS / "igniter-plug-replacement.yaml").read_text(encoding="utf-8"))
WINDOW_S = 15 * 60   # the station's grounding window: common practice, no source


def test_the_grounding_window_is_fifteen_minutes():
    assert isolation.GROUNDING_VALID_S == WINDOW_S


def _verified(job: _Job, volts: str = "0.02", at_s: float = 240):
    job.done("discharge", at_s=220)
    return job.record("reading_recorded", "verify-isolation", {"value": volts, "unit": "V",
                                                            "instrument_id": "VM-1"},
                      at_s=at_s)


def _removal_grounded(at_s: float = 300) -> _Job:
    job = _removal_at_discharge(disconnected_at_s=100)
    _verified(job)
    job.done("disconnect-leads", at_s=250)
    for step_id in ("ground-lead", "cap-connectors"):
        job.done(step_id, at_s=260)
    job.done("ground-terminals", at_s=at_s)
    return job


# --- isolation verified -------------------------------------------------------------------

def test_the_lead_is_not_disconnected_before_the_isolation_is_verified():
    job = _removal_at_discharge(disconnected_at_s=100)
    job.done("discharge", at_s=220)
    refusal = job.refusal("step_done", "disconnect-leads", at=job.at(230))
    assert refusal.rule == "isolation_not_verified"
    assert not job.state.isolation_verified


def test_a_part_is_not_recorded_before_the_isolation_is_verified():
    job = _removal_at_discharge(disconnected_at_s=100)
    refusal = job.refusal("part_recorded", "removed-exciter", {}, at=job.at(230))
    assert refusal.rule == "isolation_not_verified"


@pytest.mark.parametrize("volts, verified", [
    ("0.5", True),     # exactly at the limit is within it (the reading rule's own)
    ("0.51", False),   # above: voltage present
    ("27.9", False),   # the breaker did not isolate a 28 V DC bus (demo)
])
def test_an_isolation_reading_verifies_only_within_its_limit(volts, verified):
    job = _removal_at_discharge(disconnected_at_s=100)
    stored = _verified(job, volts)["data"]
    assert job.state.isolation_verified is verified
    assert stored["isolation"] == ("verified" if verified else "not verified")
    assert stored["verdict"] == ("within" if verified else "out of limits")


def test_a_reading_in_millivolts_is_converted_before_it_is_judged():
    job = _removal_at_discharge(disconnected_at_s=100)
    job.done("discharge", at_s=220)
    stored = job.record("reading_recorded", "verify-isolation", {"value": "600", "unit": "mV",
                                                                     "instrument_id": "VM-1"},
                        at_s=230)["data"]
    assert stored["converted"] == pytest.approx(0.6)   # 600 mV = 0.6 V (SI prefix)
    assert stored["verdict"] == "out of limits"


def test_a_near_limit_band_never_verifies_isolation():
    # Guarded acceptance: the near-limit band of a reading counts as not verified.
    step = isolation.Reading.model_validate({
        "id": "iso", "kind": "reading", "text": "Volts at the pins.", "value": "number",
        "unit": "V", "limits": {"max": 0.5}, "near_margin": 0.1, "verifies": "isolation"})
    judged = isolation.isolation_verdict(step, {"verdict": "near limit", "converted": 0.45})
    assert judged["verdict"] == "out of limits" and judged["isolation"] == "not verified"


def test_voltage_present_stops_the_job_and_cannot_be_deferred():
    job = _removal_at_discharge(disconnected_at_s=100)
    _verified(job, "26.5")
    assert "verify-isolation" in job.state.awaiting_finding
    assert job.refusal("step_done", "disconnect-leads", at=job.at(300)).rule \
        == "isolation_not_verified"
    deferral = {"text": "26 V on pin A", "disposition": "deferred", "reference": "DD-1",
                "limit": "10 FH"}
    assert job.refusal("finding", "verify-isolation", deferral, at=job.at(300)).rule \
        == "isolation_not_deferrable"
    job.record("finding", "verify-isolation", {"text": "Wrong breaker pulled; IGN-A opened "
                                               "and tagged", "disposition": "repaired"},
               at_s=400)
    assert not job.state.isolation_verified
    assert job.state.next_step.id == "verify-isolation"
    job.record("reading_recorded", "verify-isolation", {"value": "0.01", "unit": "V",
                                                          "instrument_id": "VM-1"}, at_s=500)
    assert job.state.isolation_verified
    job.done("disconnect-leads", at_s=510)


def test_reconnecting_the_input_undoes_the_isolation_check_and_the_grounding():
    job = _removal_grounded()
    assert job.state.isolation_verified and job.state.lead_grounded is not None
    job.record("input_reconnected", None, at_s=400)
    assert not job.state.isolation_verified
    assert job.state.lead_grounded is None
    assert "verify-isolation" not in job.state.completed


# --- grounding before handling ------------------------------------------------------------

def test_the_grounding_step_records_when_the_lead_was_grounded():
    job = _removal_grounded(at_s=300)
    assert job.state.lead_grounded.station == _t(300)


def test_handling_is_allowed_up_to_the_window_and_refused_one_second_after():
    job = _removal_grounded(at_s=300)
    job.done("sealed-unit", at_s=310)
    refusal = job.refusal("step_done", "remove-unit", at=job.at(300 + WINDOW_S + 1))
    assert refusal.rule == "grounding_lapsed"
    assert refusal.details["seconds_since"] == WINDOW_S + 1
    assert refusal.details["grounded_at"] == _t(300).isoformat()
    assert "08:05" in refusal.reason    # T0 08:00 + 300 s, station time
    job.done("remove-unit", at_s=300 + WINDOW_S)


def test_grounding_again_after_a_pause_lets_the_work_go_on():
    job = _removal_grounded(at_s=300)
    job.done("sealed-unit", at_s=310)
    pause_end = 300 + 3 * 3600          # a shift change (invented)
    assert job.refusal("step_done", "remove-unit", at=job.at(pause_end)).rule \
        == "grounding_lapsed"
    job.record("lead_grounded", None, at_s=pause_end)
    job.done("remove-unit", at_s=pause_end + 60)


def test_the_device_clock_cannot_make_a_grounding_look_fresher():
    job = _removal_grounded(at_s=300)
    job.done("sealed-unit", at_s=310)
    job.record("lead_grounded", None, at_s=400, device_time=_t(0))
    # Station: 60 s since; device: 1000 s since → the longer count holds.
    assert job.refusal("step_done", "remove-unit",
                       at=job.at(460, device_now=_t(WINDOW_S + 100))).rule == "grounding_lapsed"


def test_grounding_again_waits_for_the_procedure_s_own_grounding_step():
    job = _removal_at_discharge(disconnected_at_s=100)
    refusal = job.refusal("lead_grounded", None, at=job.at(200))
    assert refusal.rule == "grounding_step_first"


def test_the_first_disconnection_of_the_lead_needs_no_grounding_but_the_next_handling_does():
    job = _removal_at_discharge(disconnected_at_s=100)
    _verified(job)
    disconnect = next(s for s in job.state.applicable if s.id == "disconnect-leads")
    assert not isolation.needs_grounding(job.state, disconnect)
    job.done("disconnect-leads", at_s=250)
    part = next(s for s in job.state.applicable if s.id == "removed-exciter")
    assert isolation.needs_grounding(job.state, part)


def test_reconnecting_a_lead_after_a_pause_needs_grounding_again():
    reconnect = next(s for s in PLUG.steps if s.id == "reconnect-lead")
    plug_removed = next(s for s in PLUG.steps if s.id == "removed-plug")
    assert isolation.handles_lead(reconnect)
    assert not isolation.handles_lead(plug_removed)   # the plug holds no charge
    assert isolation.disturbs_work(plug_removed)       # but it is work after the lockout


# --- the procedure validator ------------------------------------------------------------

LOCKOUT = """
- id: breakers
  kind: lockout
  text: Tag the breakers.
  breakers:
    - {id: IGN-A, label: IGNITION A}
"""
ISOLATION = """
- id: verify-isolation
  kind: reading
  verifies: isolation
  text: Volts at the input pins.
  value: number
  unit: V
  limits: {max: 0.5}
"""
GROUND = check_step("ground", grounds_lead="true")
OPEN_LEAD = check_step("off-lead", disturbs="[lead_at_plug]")
PUT_BACK = check_step("on-lead", restores="[lead_at_plug]")


def test_a_procedure_with_isolation_and_grounding_in_place_is_valid():
    text = procedure_text(LOCKOUT, ISOLATION, OPEN_LEAD, GROUND, PUT_BACK)
    assert [s.id for s in parse_procedure(text, FILE).steps][-1] == "on-lead"


def test_a_lockout_without_an_isolation_check_is_refused_naming_the_lockout_step():
    [problem] = problems_in(procedure_text(LOCKOUT, OPEN_LEAD, GROUND, PUT_BACK))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) \
        == (FILE, 1, "breakers", "verifies")
    assert "1910.147(d)(6)" in problem.message


def test_an_isolation_check_after_the_work_is_refused_at_the_first_disturbing_step():
    [problem] = problems_in(procedure_text(LOCKOUT, OPEN_LEAD, ISOLATION, GROUND, PUT_BACK))
    assert (problem.step_number, problem.step_id, problem.field) == (2, "off-lead", "kind")
    assert "step 3, 'verify-isolation'" in problem.message


def test_an_isolation_check_before_the_discharge_wait_is_refused():
    disconnect = check_step("input-off", power="removed", disturbs="[input]")
    wait = "- id: wait\n  kind: discharge_wait\n  text: Wait.\n  minimum: 2 min\n"
    [problem] = problems_in(procedure_text(LOCKOUT, disconnect, ISOLATION, wait, OPEN_LEAD,
                                           GROUND, PUT_BACK))
    assert (problem.step_id, problem.field) == ("verify-isolation", "verifies")


def test_handling_the_lead_without_a_grounding_step_before_it_is_refused():
    [problem] = problems_in(procedure_text(LOCKOUT, ISOLATION, OPEN_LEAD, PUT_BACK, GROUND))
    assert (problem.step_number, problem.step_id, problem.field) == (4, "on-lead", "kind")
    assert "grounds_lead: true" in problem.message


def test_an_isolation_check_must_be_a_voltage_with_a_max_or_pass_fail():
    text_reading = ISOLATION.replace("value: number", "value: text")
    problem = next(p for p in problems_in(procedure_text(LOCKOUT, text_reading))
                   if p.step_id == "verify-isolation")
    assert problem.field == "value"
    ohms = ISOLATION.replace("unit: V", "unit: ohm")
    problem = next(p for p in problems_in(procedure_text(LOCKOUT, ohms))
                   if p.step_id == "verify-isolation")
    assert problem.field == "limits"


def test_every_shop_procedure_verifies_isolation_after_its_lockout_and_grounds_the_lead():
    for path in sorted(TASKS.glob("*.yaml")):
        procedure = parse_procedure(path.read_text(encoding="utf-8"), path.name)
        assert not list(isolation.structure_problems(procedure)), path.name
        if any(getattr(s, "action", None) == "apply" for s in procedure.steps):
            assert any(isolation.is_isolation_check(s) for s in procedure.steps), path.name
        if any(isolation.handles_lead(s) for s in procedure.steps):
            assert any(isolation.is_grounding(s) for s in procedure.steps), path.name
