"""The safety gates through a job's events (no app, no database): an exciter removal on a
DC engine, the duty cycle and the functional check's pre-energising gate.

Sources:
- Order of energy control: preparation → shutdown → isolation → lock/tag applied → stored
  energy relieved → isolation verified, in that order: 29 CFR 1910.147(d)(1)–(6).
- Release: area inspected, people clear and told, each device removed by the person who
  applied it, or by a documented absent-owner procedure: 29 CFR 1910.147(e)(1)–(3).
- Bleed-down: t = RC·ln(V0/Vsafe), E = ½CV² (physics, textbook); the gate never waits less
  than the data's minimum.
- An exciter's duty cycle (on limit, mandatory off time) keeps it from overheating
  (FAA-H-8083-32 ch. 4: prescribed ignition time limits).

Every capacitor value, duty-cycle pattern, tag number, person and time below is invented
for the demo only (the QT-610 engine and its data are fictional).
"""

from __future__ import annotations

from webapp.domain import gates
from webapp.domain.checks import check_event
from webapp.domain.execution import (
    job_state,
)
from webapp.domain.gates import PowerOff

from .gate_events import (
    FUNCTIONAL,
    OTHER,
    OTHER_JOB,
    PERIODS,
    REMOVAL,
    _event,
    _Job,
    _refused,
    _removal_at_discharge,
    _removal_at_lockout,
    _t,
    _tagged,
)

# =========================================================================================
# 3. Through a job: exciter removal on a DC engine, channel A
# =========================================================================================

def test_removal_steps_stand_in_the_order_energy_control_requires():
    # 29 CFR 1910.147(d)(2) shutdown → (d)(3)-(4) isolate and tag → (d)(5) relieve stored
    # energy → then the work.
    # → (d)(6) isolation verified.
    ids = [s.id for s in REMOVAL.steps]
    assert ids.index("selectors-off") < ids.index("breakers") < ids.index("disconnect-input") \
        < ids.index("discharge") < ids.index("verify-isolation") \
        < ids.index("disconnect-leads")


def test_the_input_cannot_be_disconnected_nor_the_wait_done_before_the_lockout():
    # 29 CFR 1910.147(d)(4) before (d)(5): tags first, then the stored energy.
    job = _removal_at_lockout()
    for step_id in ("disconnect-input", "discharge"):
        refusal = job.refusal("step_done", step_id, at=job.at(10_000))
        assert refusal.rule == "out_of_order"
        assert refusal.details["next_step"] == "breakers"


def test_lockout_step_is_refused_until_both_breakers_carry_this_job_s_tags():
    job = _removal_at_lockout()
    refusal = job.refusal("step_done", "breakers", at=job.at(25))
    assert refusal.rule == "lockout_incomplete"
    assert refusal.details["breakers"] == ["IGN-A", "IGN-B"]

    job.record("breaker_tagged", "breakers", {"breaker": "IGN-A", "tag": "T-0101"}, at_s=30)
    # Another job's tag on IGN-B does not lock it out for this job.
    job.elsewhere(_tagged("T-0202", "IGN-B", person=OTHER, job=OTHER_JOB, at_s=35))
    refusal = job.refusal("step_done", "breakers", at=job.at(36))
    assert refusal.rule == "lockout_incomplete"
    assert refusal.details["breakers"] == ["IGN-B"]
    assert job.state.next_step.id == "breakers"   # tagging does not complete the step

    # The other job's number cannot be used again for this job's tag.
    assert job.refusal("breaker_tagged", "breakers", {"breaker": "IGN-B", "tag": "T-0202"},
                       at=job.at(38)).rule == "tag_in_use"
    job.record("breaker_tagged", "breakers", {"breaker": "IGN-B", "tag": "T-0102"}, at_s=40)
    job.done("breakers", at_s=50)
    assert job.state.next_step.id == "input-first"


def test_lockout_completion_uses_the_tags_given_in_the_circumstances():
    job = _removal_at_lockout()
    tags = gates.engine_tags([_tagged("T-0101", "IGN-A"), _tagged("T-0102", "IGN-B")])
    check_event(job.state, "step_done", "breakers", {}, job.at(50, tags=tags))
    others = gates.engine_tags([
        _tagged("T-0201", "IGN-A", person=OTHER, job=OTHER_JOB),
        _tagged("T-0202", "IGN-B", person=OTHER, job=OTHER_JOB)])
    refusal = job.refusal("step_done", "breakers", at=job.at(50, tags=others))
    assert refusal.rule == "lockout_incomplete"


def test_discharge_wait_counts_from_the_disconnection_s_receipt_time():
    job = _removal_at_discharge(disconnected_at_s=100)
    assert job.state.power_off == PowerOff(_t(100), None)
    # 169 s after the lockout step, but 119 s after the disconnection: refused.
    refusal = job.refusal("step_done", "discharge", at=job.at(219))
    assert refusal.rule == "discharge_wait"
    assert refusal.details["seconds_remaining"] == 1
    job.done("discharge", at_s=220)
    assert job.state.step("discharge").status == "done"


def test_discharge_wait_through_a_job_holds_until_the_device_clock_agrees_too():
    job = _removal_at_discharge(disconnected_at_s=100, device_time=_t(95))
    assert job.state.power_off == PowerOff(_t(100), _t(95))
    # Station: 200 s elapsed; device: 100 s elapsed → 20 s to go.
    refusal = job.refusal("step_done", "discharge", at=job.at(300, device_now=_t(195)))
    assert refusal.details["seconds_remaining"] == 20
    check_event(job.state, "step_done", "discharge", {}, job.at(300, device_now=_t(215)))


def test_reconnecting_the_input_undoes_the_disconnection_and_the_discharge_wait():
    # 29 CFR 1910.147(d)(5)(ii): where stored energy can re-accumulate, the control goes on.
    job = _removal_at_discharge(disconnected_at_s=100)
    job.done("discharge", at_s=700)
    job.record("input_reconnected", None, at_s=800)
    assert job.state.power_off is None
    assert job.state.next_step.id == "disconnect-input"
    assert job.state.step("discharge").status == "waiting"
    assert {"disconnect-input", "discharge"}.isdisjoint(job.state.completed)
    assert job.state.step("breakers").status == "done"      # the tags stay on
    refusal = job.refusal("step_done", "discharge", at=job.at(5000))
    assert refusal.rule == "out_of_order"
    assert refusal.details["next_step"] == "disconnect-input"


def test_after_a_reconnection_the_wait_restarts_from_the_new_disconnection():
    job = _removal_at_discharge(disconnected_at_s=100)
    job.done("discharge", at_s=700)
    job.record("input_reconnected", None, at_s=800)
    job.record("step_done", "disconnect-input", at_s=1000)
    assert job.state.power_off == PowerOff(_t(1000), None)
    # 1019 s since the first disconnection, 119 s since this one: refused.
    refusal = job.refusal("step_done", "discharge", at=job.at(1119))
    assert refusal.rule == "discharge_wait"
    assert refusal.details["seconds_remaining"] == 1
    job.done("discharge", at_s=1120)
    # The isolation is verified again after the new wait (29 CFR 1910.147(d)(6)).
    assert job.state.next_step.id == "verify-isolation"


def test_reconnecting_is_refused_when_the_input_is_not_disconnected():
    job = _removal_at_lockout()
    assert job.refusal("input_reconnected", None, at=job.at(30)).rule == "power_not_removed"


# =========================================================================================
# 5. The functional check through a job (DC exciters, both channels)
# =========================================================================================

OWNER_NAMES = {OTHER: "Ilse Marten (invented)"}


def _functional_at_gate() -> _Job:
    """Tags released, the advisories read; the pre-energising check is next."""
    job = _Job(FUNCTIONAL, None)
    for at_s, step_id in ((0, "identify"), (10, "area-before-release"), (20, "tag-owners"),
                          (30, "release-tags"), (40, "fire"), (41, "danger-areas"),
                          (42, "hearing")):
        job.done(step_id, at_s=at_s)
    assert job.state.next_step.id == "pre-energising"
    return job


def _functional_energised_a(at_s: float = 100) -> _Job:
    job = _functional_at_gate()
    job.done("pre-energising", at_s=60)
    job.done("duty-cycle-dc", at_s=70)
    job.record("energised", "run-a-dc", at_s=at_s)
    return job


def test_energising_is_refused_while_the_pre_energising_check_is_open():
    job = _functional_at_gate()
    refusal = job.refusal("energised", "run-a-dc", at=job.at(50))
    assert refusal.rule == "pre_energising_gate"
    assert refusal.details["open_steps"] == ["step 8 (pre-energising)"]


def test_the_gate_refusal_comes_first_even_for_an_ignition_run_that_is_not_next():
    fresh = _Job(FUNCTIONAL, None)     # step 1 is next; the run is far ahead
    for step_id in ("run-a-dc", "run-b-dc", "run-both-dc"):
        refusal = fresh.refusal("energised", step_id, at=fresh.at(0))
        assert refusal.rule == "pre_energising_gate"


def test_energising_is_refused_while_a_tag_hangs_and_the_refusal_names_its_owner():
    job = _functional_at_gate()
    job.done("pre-energising", at_s=60)
    job.done("duty-cycle-dc", at_s=70)
    # Someone on another job tagged channel B's breaker after the release (invented).
    hanging = gates.engine_tags([_tagged("T-0207", "IGN-B", person=OTHER, job=OTHER_JOB,
                                         at_s=80)])
    refusal = job.refusal("energised", "run-a-dc", at=job.at(90, tags=hanging,
                                                              names=OWNER_NAMES))
    assert refusal.rule == "tags_active"
    assert refusal.details["tags"] == ["T-0207"]
    assert "Ilse Marten (invented)" in refusal.reason and "IGN-B" in refusal.reason


def test_the_tags_refusal_lists_every_hanging_tag_by_breaker_and_says_when_no_name_is_known():
    hanging = gates.engine_tags([
        _tagged("T-0302", "IGN-B", person=OTHER, job=OTHER_JOB),
        _tagged("T-0301", "IGN-A", person=99, job=OTHER_JOB)])     # 99: no name on record
    refusal = _refused(gates.check_pre_energising, [], hanging, OWNER_NAMES)
    assert refusal.details["tags"] == ["T-0301", "T-0302"]
    assert "T-0301 on IGN-A (unknown)" in refusal.reason
    assert "T-0302 on IGN-B (Ilse Marten (invented))" in refusal.reason
    gates.check_pre_energising([], {}, OWNER_NAMES)


def test_after_the_gate_energising_is_accepted_and_completes_the_run_step():
    job = _functional_energised_a(at_s=100)
    state = job.state
    assert state.step("run-a-dc").status == "done"
    assert state.next_step.id == "counting"
    clock = state.clocks["A"]
    assert clock.is_on and clock.on_since == PowerOff(_t(100), None)
    assert clock.periods == PERIODS and clock.runs == 1
    assert clock.on_remaining_s(_t(130)) == 90.0
    assert "B" not in state.clocks


def test_the_ignition_off_check_de_energises_and_the_off_time_counts_from_it():
    job = _functional_energised_a(at_s=100)
    # The spark count between has no recording rules yet, so the selector-off event is
    # stored as a synced log would hold it.
    job.apply(_event("step_done", "off-a", at_s=210))
    clock = job.state.clocks["A"]
    assert not clock.is_on and clock.off_since == PowerOff(_t(210), None)
    assert clock.overrun_s == 0.0 and clock.required_off_s == 180.0
    assert clock.off_remaining_s(_t(310)) == 80.0
    refusal = _refused(gates.check_energise, job.state.clocks, ("A",), _t(389), None)
    assert refusal.rule == "duty_cycle_off" and refusal.details["seconds_remaining"] == 1
    gates.check_energise(job.state.clocks, ("A",), _t(390), None)


def test_a_de_energised_event_switches_off_only_its_channel():
    job = _functional_energised_a(at_s=100)
    job.apply(_event("energised", "run-b-dc", at_s=105))
    job.record("de_energised", None, {"channel": "B"}, at_s=200)
    assert job.state.clocks["A"].is_on and not job.state.clocks["B"].is_on
    assert job.state.clocks["B"].off_since == PowerOff(_t(200), None)


def test_a_job_resumed_elsewhere_mid_cycle_has_the_same_clocks_as_the_one_built_step_by_step():
    job = _functional_energised_a(at_s=100)
    job.apply(_event("step_done", "off-a", at_s=220))
    job.apply(_event("energised", "run-b-dc", at_s=230))     # channel B on, A resting
    resumed = job_state(FUNCTIONAL, job.events)
    assert resumed == job.state
    assert resumed.clocks == job.state.clocks
    assert resumed.clocks["B"].on_remaining_s(_t(300)) == 50.0
    # The same refusal, with the same time left, on either device.
    for state in (resumed, job.state):
        refusal = _refused(gates.check_energise, state.clocks, ("A",), _t(220 + 179), None)
        assert refusal.details["seconds_remaining"] == 1
        assert _refused(gates.check_energise, state.clocks, ("B",), _t(300),
                        None).rule == "already_on"


def test_the_release_step_is_refused_while_a_tag_still_hangs_on_its_breakers():
    # 29 CFR 1910.147(e)(3): every device off, each by its owner, before energy returns.
    job = _Job(FUNCTIONAL, None)
    for at_s, step_id in ((0, "identify"), (10, "area-before-release"), (20, "tag-owners")):
        job.done(step_id, at_s=at_s)
    job.elsewhere(_tagged("T-0201", "IGN-A", person=OTHER, job=OTHER_JOB, at_s=-7200))
    refusal = job.refusal("step_done", "release-tags", at=job.at(30))
    assert refusal.rule == "tags_still_on" and refusal.details["breakers"] == ["IGN-A"]
    assert job.refusal("tag_removed", "release-tags", {"tag": "T-0201"},
                       at=job.at(31)).rule == "tag_owner"
    # A supervisor's name typed into the mechanic's entry is no authorisation; the path on
    # the supervisor's own log-in is in test_tag_handover.py.
    absent = {"reason": "Owner off shift, phoned twice (invented)", "supervisor": "sup1"}
    assert job.refusal("tag_removed", "release-tags", {"tag": "T-0201", "absent_owner": absent},
                       at=job.at(32)).rule == "absent_owner_typed"
    assert job.refusal("step_done", "release-tags", at=job.at(33)).rule == "tags_still_on"
