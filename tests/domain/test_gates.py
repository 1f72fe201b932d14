"""The safety gates as pure rules: lockout/tagout, the discharge wait, the duty cycle, the
pre-energising gate, alone and through a job's events (no app, no database).

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

import itertools
import math
from dataclasses import replace
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest

from webapp.domain import gates, tag_handover
from webapp.domain.checks import Circumstances, check_event
from webapp.domain.engine import EngineState, apply_engine_event, starting_state
from webapp.domain.errors import RuleRefusal
from webapp.domain.execution import (
    COMPLETING_EVENT,
    JobState,
    apply_event,
    configuration_for,
    job_state,
)
from webapp.domain.gates import ChannelClock, DutyPeriod, PowerOff, Tag
from webapp.domain.instruments import Instrument
from webapp.domain.procedure_files import parse_procedure
from webapp.domain.procedures import DischargeWait, DutyCycle, Lockout, Procedure

TASKS = Path(__file__).resolve().parents[2] / "tasks"
REMOVAL = parse_procedure((TASKS / "exciter-removal.yaml").read_text(encoding="utf-8"))
FUNCTIONAL = parse_procedure(
    (TASKS / "ignition-functional-check.yaml").read_text(encoding="utf-8"))

# An engine with a DC exciter and a surface-discharge plug on each channel (demo fleet record).
DC_ENGINE = [
    {"kind": "exciter", "type": "dc", "channel": "A"},
    {"kind": "exciter", "type": "dc", "channel": "B"},
    {"kind": "plug", "type": "surface-discharge", "channel": "A"},
    {"kind": "plug", "type": "surface-discharge", "channel": "B"},
]

T0 = datetime(2026, 12, 1, 8, 0, tzinfo=UTC)   # invented demo morning
MECH = 1          # the mechanic doing this job (invented)
OTHER = 7         # a mechanic on another job on the same engine (invented)
JOB = 11          # this job
OTHER_JOB = 12    # another job on the same engine


_EVENT_NUMBERS = itertools.count(1)


def _t(seconds: float) -> datetime:
    return T0 + timedelta(seconds=seconds)


def _event(kind: str, step_id: str | None = None, data: dict[str, Any] | None = None, *,
           at_s: float = 0.0, person: int = MECH, job: int = JOB,
           device_time: datetime | None = None) -> dict[str, Any]:
    return {"id": f"e-{next(_EVENT_NUMBERS)}", "kind": kind, "step_id": step_id,
            "data": {} if data is None else data,
            "person_id": person, "job_id": job, "received_at": _t(at_s).isoformat(),
            "device_time": device_time.isoformat() if device_time else None}


def _refused(call, *args, **kwargs) -> RuleRefusal:
    with pytest.raises(RuleRefusal) as refused:
        call(*args, **kwargs)
    return refused.value


# --- step models ------------------------------------------------------------------------

def _step(procedure: Procedure, step_id: str):
    return next(s for s in procedure.steps if s.id == step_id)


APPLY: Lockout = _step(REMOVAL, "breakers")                 # IGN-A, IGN-B
RELEASE: Lockout = _step(FUNCTIONAL, "release-tags")        # with an absent-owner path
RELEASE_OWNERS_ONLY = Lockout.model_validate({
    "id": "release-owners-only", "kind": "lockout", "action": "release",
    "text": "Remove your tags.",
    "breakers": [{"id": "IGN-A", "label": "IGNITION A"}, {"id": "IGN-B", "label": "IGNITION B"}],
})
APPLY_A_ONLY = Lockout.model_validate({
    "id": "breaker-a", "kind": "lockout", "text": "Tag channel A's breaker.",
    "breakers": [{"id": "IGN-A", "label": "IGNITION A"}],
})
RELEASE_A_ONLY = Lockout.model_validate({
    "id": "release-a", "kind": "lockout", "action": "release", "text": "Untag A.",
    "absent_owner": "Shop absent-owner procedure (demo)",
    "breakers": [{"id": "IGN-A", "label": "IGNITION A"}],
})


def _tagged(tag: str, breaker: str, *, person: int = MECH, job: int = JOB,
            at_s: float = 0.0) -> dict[str, Any]:
    return _event("breaker_tagged", "breakers", {"tag": tag, "breaker": breaker},
                  at_s=at_s, person=person, job=job)


def _taken_over(tag: str, *, person: int, job: int, at_s: float) -> dict[str, Any]:
    return _event("tag_taken_over", None, {"tag": tag, "breaker_confirmed_open": True},
                  at_s=at_s, person=person, job=job)


def _removed(tag: str, *, person: int, job: int, at_s: float) -> dict[str, Any]:
    return _event("tag_removed", "release-tags", {"tag": tag}, at_s=at_s, person=person, job=job)


# =========================================================================================
# 1. Lockout / tagout
# =========================================================================================

def test_engine_tags_records_each_tag_with_its_breaker_owner_job_and_time():
    tags = gates.engine_tags([_tagged("T-0101", "IGN-A", at_s=5),
                              _tagged("T-0102", "IGN-B", person=OTHER, job=OTHER_JOB, at_s=9)])
    assert tags == {
        "T-0101": Tag("T-0101", "IGN-A", MECH, JOB, MECH, _t(5).isoformat(), _t(5).isoformat()),
        "T-0102": Tag("T-0102", "IGN-B", OTHER, OTHER_JOB, OTHER, _t(9).isoformat(),
                      _t(9).isoformat()),
    }


def test_engine_tags_takeover_moves_owner_and_job_but_keeps_who_hung_it_and_when():
    tags = gates.engine_tags([_tagged("T-0101", "IGN-A", at_s=5),
                              _taken_over("T-0101", person=OTHER, job=OTHER_JOB, at_s=60)])
    tag = tags["T-0101"]
    assert (tag.owner_id, tag.job_id) == (OTHER, OTHER_JOB)
    assert (tag.applied_by, tag.applied_at, tag.breaker) == (MECH, _t(5).isoformat(), "IGN-A")


def test_engine_tags_forgets_a_removed_tag_and_its_number_may_hang_again_later():
    events = [_tagged("T-0101", "IGN-A"), _tagged("T-0102", "IGN-B"),
              _removed("T-0101", person=MECH, job=JOB, at_s=30)]
    assert set(gates.engine_tags(events)) == {"T-0102"}
    again = gates.engine_tags([*events, _tagged("T-0101", "IGN-B", person=OTHER,
                                                job=OTHER_JOB, at_s=40)])
    assert again["T-0101"].breaker == "IGN-B" and again["T-0101"].owner_id == OTHER


def test_engine_tags_takeover_of_a_tag_that_does_not_hang_creates_nothing():
    assert gates.engine_tags([_taken_over("T-0999", person=OTHER, job=OTHER_JOB,
                                          at_s=1)]) == {}


def test_breaker_tagged_accepts_a_new_numbered_tag_on_a_breaker_of_the_step():
    # 29 CFR 1910.147(d)(4): the lockout/tagout device is applied to each isolating device.
    gates.check_breaker_tagged(APPLY, {"breaker": "IGN-A", "tag": "T-0101"}, {}, JOB)


def test_breaker_tagged_refuses_a_breaker_the_step_does_not_lock_out():
    for breaker in ("IGN-C", None, "ign-a"):
        refusal = _refused(gates.check_breaker_tagged, APPLY,
                           {"breaker": breaker, "tag": "T-0101"}, {}, JOB)
        assert refusal.rule == "unknown_breaker"
        assert "IGN-A, IGN-B" in refusal.reason


@pytest.mark.parametrize("data", [
    {"breaker": "IGN-A"},                                  # no number at all
    {"breaker": "IGN-A", "tag": ""},                       # empty
    {"breaker": "IGN-A", "tag": "   "},                    # blank
    {"breaker": "IGN-A", "tag": "T" * (gates.MAX_TAG_LENGTH + 1)},   # too long
    {"breaker": "IGN-A", "tag": 4471},                     # not written as text
], ids=["missing", "empty", "blank", "too-long", "not-text"])
def test_breaker_tagged_refuses_a_missing_blank_or_overlong_tag_number(data):
    refusal = _refused(gates.check_breaker_tagged, APPLY, data, {}, JOB)
    assert refusal.rule == "tag_number_missing"


def test_breaker_tagged_accepts_a_number_of_exactly_the_longest_length():
    gates.check_breaker_tagged(APPLY, {"breaker": "IGN-A", "tag": "T" * gates.MAX_TAG_LENGTH},
                               {}, JOB)


def test_breaker_tagged_refuses_a_number_already_hanging_anywhere_on_the_engine():
    tags = gates.engine_tags([_tagged("T-0102", "IGN-B", person=OTHER, job=OTHER_JOB)])
    refusal = _refused(gates.check_breaker_tagged, APPLY, {"breaker": "IGN-A", "tag": "T-0102"},
                       tags, JOB)
    assert refusal.rule == "tag_in_use"
    assert "IGN-B" in refusal.reason
    # Surrounding spaces do not make it another number.
    refusal = _refused(gates.check_breaker_tagged, APPLY,
                       {"breaker": "IGN-A", "tag": " T-0102 "}, tags, JOB)
    assert refusal.rule == "tag_in_use"


def test_breaker_tagged_refuses_a_second_tag_of_this_job_on_the_same_breaker():
    tags = gates.engine_tags([_tagged("T-0101", "IGN-A")])
    refusal = _refused(gates.check_breaker_tagged, APPLY, {"breaker": "IGN-A", "tag": "T-0103"},
                       tags, JOB)
    assert refusal.rule == "already_tagged"


def test_breaker_tagged_lets_another_job_hang_its_own_tag_on_the_same_breaker():
    # Each person working answers for their own tag (common practice, no source).
    tags = gates.engine_tags([_tagged("T-0101", "IGN-A")])
    gates.check_breaker_tagged(APPLY, {"breaker": "IGN-A", "tag": "T-0201"}, tags, OTHER_JOB)


def test_release_step_refuses_to_hang_new_tags():
    refusal = _refused(gates.check_breaker_tagged, RELEASE,
                       {"breaker": "IGN-A", "tag": "T-0101"}, {}, JOB)
    assert refusal.rule == "wrong_event_for_step"


def test_a_tag_hung_with_spaces_around_its_number_can_still_be_found_by_that_number():
    # check_breaker_tagged accepts " T-0105 " (it strips the number), and the event stores the
    # data as sent (a log synced from before numbers were stored stripped). The tag must then
    # be the tag T-0105 for every later rule: its owner can remove it, a second T-0105 is
    # refused, and a hand-over finds it.
    hung = [_tagged(" T-0105 ", "IGN-A")]
    assert gates.check_breaker_tagged(APPLY, hung[0]["data"], {}, JOB)["tag"] == "T-0105"
    tags = gates.engine_tags(hung)
    tag_handover.check_tag_removed(RELEASE, {"tag": " T-0105 "}, tags, MECH, JOB)
    tag_handover.check_tag_removed(RELEASE, {"tag": "T-0105"}, tags, MECH, JOB)
    tag_handover.check_tag_handed_over({"tag": "T-0105", "to": OTHER}, tags, MECH,
                                       {OTHER: ("mechanic",)})
    refusal = _refused(gates.check_breaker_tagged, APPLY,
                       {"breaker": "IGN-B", "tag": "T-0105"}, tags, OTHER_JOB)
    assert refusal.rule == "tag_in_use"


# --- handover and removal by someone else: tests/domain/test_tag_handover.py --------------

# --- lockout complete ------------------------------------------------------------------------

def test_apply_lockout_is_met_only_by_this_job_s_tags_on_every_breaker():
    assert gates.lockout_complete(APPLY, {}, JOB) == ["IGN-A", "IGN-B"]
    mine_a = gates.engine_tags([_tagged("T-0101", "IGN-A"),
                                _tagged("T-0202", "IGN-B", person=OTHER, job=OTHER_JOB)])
    assert gates.lockout_complete(APPLY, mine_a, JOB) == ["IGN-B"]   # another job's tag on B
    assert gates.lockout_complete(APPLY, mine_a, OTHER_JOB) == ["IGN-A"]
    both = gates.engine_tags([_tagged("T-0101", "IGN-A"), _tagged("T-0102", "IGN-B")])
    assert gates.lockout_complete(APPLY, both, JOB) == []


def test_a_taken_over_tag_counts_for_the_job_that_took_it_and_no_longer_for_the_first():
    tags = gates.engine_tags([_tagged("T-0101", "IGN-A"), _tagged("T-0102", "IGN-B"),
                              _taken_over("T-0101", person=OTHER, job=OTHER_JOB, at_s=60)])
    assert gates.lockout_complete(APPLY, tags, JOB) == ["IGN-A"]
    assert gates.lockout_complete(APPLY, tags, OTHER_JOB) == ["IGN-B"]


def test_release_lockout_lists_the_step_s_breakers_where_any_tag_still_hangs():
    # 29 CFR 1910.147(e): energy may be restored only when every device is off.
    tags = gates.engine_tags([_tagged("T-0101", "IGN-A"),
                              _tagged("T-0202", "IGN-B", person=OTHER, job=OTHER_JOB)])
    assert gates.lockout_complete(RELEASE, tags, JOB) == ["IGN-A", "IGN-B"]
    assert gates.lockout_complete(RELEASE_A_ONLY, tags, JOB) == ["IGN-A"]
    assert gates.lockout_complete(RELEASE, {}, JOB) == []


# =========================================================================================
# 2. Discharge wait
# =========================================================================================

DEMO_WAIT: DischargeWait = _step(REMOVAL, "discharge")
SLOW_WAIT = DischargeWait.model_validate({
    "id": "slow-discharge", "kind": "discharge_wait", "text": "Wait.", "minimum": "1 min",
    "capacitor": {"capacitance": "10 uF", "charge_voltage": "2.5 kV",
                  "bleed_resistance": "10 Mohm", "safe_voltage": "50 V"},
})    # invented values, chosen so the bleed-down outlasts the minimum
BARE_WAIT = DischargeWait.model_validate({
    "id": "bare-discharge", "kind": "discharge_wait", "text": "Wait.", "minimum": "3 min"})


def test_demo_discharge_wait_is_the_data_minimum_because_the_bleed_down_is_shorter():
    # Demo exciter (invented): 4 uF at 2.5 kV through 2.2 Mohm, safe at 50 V, minimum 2 min.
    need = gates.discharge_requirement(DEMO_WAIT)
    assert need.minimum_s == 120.0
    # t = RC·ln(V0/Vs) = (4e-6 F · 2.2e6 ohm)·ln(2500/50) = 8.8 s · ln 50 ≈ 34.43 s
    assert need.computed_s == pytest.approx(8.8 * math.log(50), rel=1e-12)
    assert need.computed_s == pytest.approx(34.43, abs=0.005)
    assert need.required_s == 120.0
    # E = ½CV² = ½ · 4e-6 · 2500² = 12.5 J
    assert need.energy_j == pytest.approx(12.5, rel=1e-12)
    # V(120 s) = 2500·e^(−120/8.8) ≈ 3.0e-3 V: well under the safe 50 V when the wait ends.
    assert need.voltage_after(120.0) == pytest.approx(2500 * math.exp(-120 / 8.8), rel=1e-12)


def test_a_bleed_down_longer_than_the_minimum_becomes_the_required_wait():
    need = gates.discharge_requirement(SLOW_WAIT)
    # t = (10e-6 F · 10e6 ohm)·ln(2500/50) = 100 s · ln 50 ≈ 391.2 s > 60 s minimum
    assert need.minimum_s == 60.0
    assert need.computed_s == pytest.approx(100 * math.log(50), rel=1e-12)
    assert need.required_s == pytest.approx(391.2, abs=0.05)
    assert need.voltage_after(need.required_s) == pytest.approx(50.0, rel=1e-9)


def test_waits_are_shown_as_minutes_and_seconds_rounded_up():
    assert [gates.mmss(v) for v in (120, 119.2, 61, 0.01, 0, -5)] == [
        "2:00", "2:00", "1:01", "0:01", "0:00", "0:00"]


def test_without_capacitor_data_the_minimum_alone_is_required_never_less():
    need = gates.discharge_requirement(BARE_WAIT)
    assert (need.minimum_s, need.computed_s, need.required_s) == (180.0, None, 180.0)
    assert need.energy_j is None and need.voltage_after(10.0) is None


def test_discharge_wait_is_served_exactly_at_the_limit_and_refused_one_second_early():
    need = gates.discharge_requirement(DEMO_WAIT)
    off = PowerOff(_t(0), None)
    gates.check_discharge_served(need, off, _t(120), None)
    refusal = _refused(gates.check_discharge_served, need, off, _t(119), None)
    assert refusal.rule == "discharge_wait"
    assert refusal.details["seconds_remaining"] == 1
    assert "0:01" in refusal.reason
    assert gates.wait_remaining(need.required_s, off, _t(119), None) == 1.0
    assert gates.wait_remaining(need.required_s, off, _t(500), None) == 0.0


def test_a_fraction_of_a_second_left_is_reported_as_a_whole_second_never_as_zero():
    need = gates.discharge_requirement(SLOW_WAIT)     # ≈ 391.2 s
    off = PowerOff(_t(0), None)
    refusal = _refused(gates.check_discharge_served, need, off, _t(391), None)
    assert refusal.details["seconds_remaining"] == 1
    gates.check_discharge_served(need, off, _t(392), None)


def test_discharge_wait_is_refused_when_the_input_is_not_recorded_as_disconnected():
    refusal = _refused(gates.check_discharge_served, gates.discharge_requirement(DEMO_WAIT),
                       None, _t(10_000), None)
    assert refusal.rule == "power_not_removed"


def test_when_the_device_clock_shows_less_elapsed_its_longer_remaining_wait_holds():
    need = gates.discharge_requirement(DEMO_WAIT)
    # Device clock 30 s behind the station's (invented); 200 s by the station, 100 s by the
    # device: 20 s are still to wait.
    off = PowerOff(_t(0), _t(-30))
    assert gates.wait_remaining(120.0, off, _t(200), _t(70)) == 20.0
    refusal = _refused(gates.check_discharge_served, need, off, _t(200), _t(70))
    assert refusal.details["seconds_remaining"] == 20
    gates.check_discharge_served(need, off, _t(200), _t(90))   # both clocks: 120 s or more


def test_a_device_clock_showing_more_elapsed_does_not_shorten_the_station_s_wait():
    need = gates.discharge_requirement(DEMO_WAIT)
    off = PowerOff(_t(0), _t(0))
    refusal = _refused(gates.check_discharge_served, need, off, _t(100), _t(500))
    assert refusal.details["seconds_remaining"] == 20


def test_with_only_one_device_time_known_the_station_clock_decides():
    off_without_device = PowerOff(_t(0), None)
    assert gates.wait_remaining(120.0, off_without_device, _t(120), _t(0)) == 0.0
    off_with_device = PowerOff(_t(0), _t(0))
    assert gates.wait_remaining(120.0, off_with_device, _t(120), None) == 0.0


# =========================================================================================
# 3. Through a job: exciter removal on a DC engine, channel A
# =========================================================================================

# The register these jobs' readings are taken with (invented; due far ahead).
TEST_REGISTER = {"VM-1": Instrument("VM-1", "voltmeter", 0.0, 600.0, "V", date(2099, 12, 31))}


class _Job:
    """A job's log and state, each event checked by the rules before it is applied."""

    def __init__(self, procedure: Procedure, channel: str | None) -> None:
        configuration = configuration_for(procedure, "QT-610", DC_ENGINE, channel)
        self.procedure = procedure
        self.events: list[dict[str, Any]] = [{
            "kind": "job_opened", "step_id": None, "data": configuration.as_data(),
            "person_id": MECH, "job_id": JOB, "received_at": _t(-3600).isoformat(),
            "device_time": None}]
        self.engine_events: list[dict[str, Any]] = []   # tag events of every job on the engine
        self.state: JobState = job_state(procedure, self.events)
        # The engine this job works on: every part fitted, as the fleet lists it (invented).
        self.engine: EngineState = starting_state(
            {"part_number": "P", "serial": f"S-{part['kind']}-{part['channel']}", **part}
            for part in [*DC_ENGINE, *({"kind": "lead", "type": "ht-lead", "channel": c}
                                       for c in "AB")])

    @property
    def tags(self) -> dict[str, Tag]:
        return gates.engine_tags(self.engine_events)

    def at(self, at_s: float, device_now: datetime | None = None,
           tags: dict[str, Tag] | None = None,
           names: dict[int, str] | None = None) -> Circumstances:
        return Circumstances(now=_t(at_s), device_now=device_now, person_id=MECH, job_id=JOB,
                             tags=self.tags if tags is None else tags, names=names or {},
                             engine=self.engine)

    def record(self, kind: str, step_id: str | None, data: dict[str, Any] | None = None, *,
               at_s: float, device_time: datetime | None = None) -> dict[str, Any]:
        data = {} if data is None else data
        at = replace(self.at(at_s, device_time),
                     instrument=TEST_REGISTER.get(str(data.get("instrument_id"))))
        stored = dict(check_event(self.state, kind, step_id, data, at))
        return self.apply(_event(kind, step_id, stored, at_s=at_s, device_time=device_time))

    def apply(self, event: dict[str, Any]) -> dict[str, Any]:
        """Store an event without the checks (as a log synced from elsewhere would hold it)."""
        self.events.append(event)
        if event["kind"] in gates.TAG_EVENT_KINDS:
            self.engine_events.append(event)
        self.state = apply_event(self.state, event)
        self.engine = apply_engine_event(self.engine, {"id": "-", **event})
        return event

    def elsewhere(self, event: dict[str, Any]) -> None:
        """A tag event of another job on the same engine: in the engine's tags, not this log."""
        self.engine_events.append(event)

    def done(self, step_id: str, *, at_s: float) -> dict[str, Any]:
        """Complete a step with the event its kind takes, every item ticked."""
        step = next(s for s in self.state.applicable if s.id == step_id)
        items = getattr(step, "items", None)
        data = {"items": list(range(len(items)))} if items else {}
        return self.record(COMPLETING_EVENT[step.kind], step_id, data, at_s=at_s)

    def refusal(self, kind: str, step_id: str | None, data: dict[str, Any] | None = None, *,
                at: Circumstances) -> RuleRefusal:
        return _refused(check_event, self.state, kind, step_id, {} if data is None else data, at)


def _removal_at_lockout() -> _Job:
    job = _Job(REMOVAL, "A")
    for at_s, step_id in ((0, "identify"), (10, "selectors-off"),
                          (20, "lethal-energy-breakers")):
        job.done(step_id, at_s=at_s)
    assert job.state.next_step.id == "breakers"
    return job


def _removal_at_discharge(disconnected_at_s: float = 100,
                          device_time: datetime | None = None) -> _Job:
    job = _removal_at_lockout()
    job.record("breaker_tagged", "breakers", {"breaker": "IGN-A", "tag": "T-0101"}, at_s=30)
    job.record("breaker_tagged", "breakers", {"breaker": "IGN-B", "tag": "T-0102"}, at_s=40)
    job.done("breakers", at_s=50)
    job.done("input-first", at_s=60)
    job.record("step_done", "disconnect-input", at_s=disconnected_at_s, device_time=device_time)
    assert job.state.next_step.id == "discharge"
    return job


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
# 4. Duty cycle
# =========================================================================================

# Demo duty cycle, invented: 2 min on, 3 min off, 2 min on, 23 min off.
PATTERN = DutyCycle.model_validate({"pattern": ["on 2 min", "off 3 min", "on 2 min",
                                                "off 23 min"]})
ON_OFF = DutyCycle.model_validate({"max_on": "2 min", "min_off": "5 min"})   # invented
CONTINUOUS = DutyCycle.model_validate({"continuous": True})
PERIODS = gates.duty_periods(PATTERN)


def test_a_pattern_becomes_on_limits_with_the_off_time_after_each():
    assert PERIODS == (DutyPeriod(120.0, 180.0), DutyPeriod(120.0, 1380.0))


def test_max_on_with_min_off_is_one_period():
    assert gates.duty_periods(ON_OFF) == (DutyPeriod(120.0, 300.0),)


def test_a_continuous_rating_has_no_periods():
    assert gates.duty_periods(CONTINUOUS) == ()


def _on(clock: ChannelClock, at_s: float, periods=PERIODS) -> ChannelClock:
    return clock.energised(PowerOff(_t(at_s), None), periods)


def _off(clock: ChannelClock, at_s: float) -> ChannelClock:
    return clock.de_energised(PowerOff(_t(at_s), None))


def _energise_refusal(clock: ChannelClock, at_s: float, channel: str = "A") -> RuleRefusal:
    return _refused(gates.check_energise, {channel: clock}, (channel,), _t(at_s), None)


def test_first_on_period_then_the_first_off_time_must_be_served():
    clock = _off(_on(ChannelClock(), 0), 120)
    assert not clock.is_on and clock.required_off_s == 180.0
    assert clock.off_remaining_s(_t(120)) == 180.0
    refusal = _energise_refusal(clock, 299)
    assert refusal.rule == "duty_cycle_off"
    assert refusal.details["seconds_remaining"] == 1 and refusal.details["channel"] == "A"
    gates.check_energise({"A": clock}, ("A",), _t(300), None)


def test_the_second_on_period_requires_the_long_off_time():
    clock = _off(_on(_off(_on(ChannelClock(), 0), 120), 300), 420)
    assert (clock.period, clock.runs, clock.required_off_s) == (1, 2, 1380.0)
    refusal = _energise_refusal(clock, 420 + 1379)
    assert refusal.details["seconds_remaining"] == 1
    gates.check_energise({"A": clock}, ("A",), _t(420 + 1380), None)


def test_after_a_full_rest_the_pattern_starts_again_at_its_first_period():
    clock = _off(_on(_off(_on(ChannelClock(), 0), 120), 300), 420)
    clock = _on(clock, 420 + 1380)
    assert clock.period == 0 and clock.on_limit_s == 120.0
    clock = _off(clock, 420 + 1380 + 120)
    assert clock.required_off_s == 180.0
    # A full rest after the first period also restarts it rather than moving on.
    rested = _on(_off(_on(ChannelClock(), 0), 120), 120 + 1380)
    assert rested.period == 0
    short_rest = _on(_off(_on(ChannelClock(), 0), 120), 120 + 1379)
    assert short_rest.period == 1


def test_a_run_past_the_on_limit_is_recorded_as_an_overrun():
    clock = _on(ChannelClock(), 0)
    assert clock.on_remaining_s(_t(100)) == 20.0
    assert clock.on_remaining_s(_t(150)) == -30.0
    clock = _off(clock, 150)
    assert clock.overrun_s == 30.0
    # A later short run does not hide the earlier overrun.
    clock = _off(_on(clock, 330), 340)
    assert clock.overrun_s == 30.0


def test_a_run_within_the_limit_records_no_overrun():
    assert _off(_on(ChannelClock(), 0), 119).overrun_s == 0.0


def test_a_continuous_rating_never_refuses_the_next_on():
    clock = ChannelClock()
    for start in (0, 3600, 3601):
        clock = _on(clock, start, ())
        assert clock.on_remaining_s(_t(start + 10_000)) is None
        clock = _off(clock, start + 0.5)
        assert clock.off_remaining_s(_t(start + 0.5)) == 0.0
        gates.check_energise({"A": clock}, ("A",), _t(start + 0.5), None)
    assert clock.overrun_s == 0.0


@pytest.mark.parametrize("resting", ["A", "B"])
def test_energising_both_channels_is_refused_if_either_is_in_its_off_time(resting):
    resting_clock = _off(_on(ChannelClock(), 0), 120)          # 180 s off from t=120
    rested_clock = _off(_on(ChannelClock(), -2000), -1880)     # long since rested
    clocks = {resting: resting_clock, ("B" if resting == "A" else "A"): rested_clock}
    refusal = _refused(gates.check_energise, clocks, ("A", "B"), _t(200), None)
    assert refusal.rule == "duty_cycle_off"
    assert refusal.details["channel"] == resting
    assert refusal.details["seconds_remaining"] == 100
    gates.check_energise(clocks, ("A", "B"), _t(300), None)


def test_energising_a_channel_already_on_is_refused():
    refusal = _refused(gates.check_energise, {"A": _on(ChannelClock(), 0)}, ("A",), _t(10), None)
    assert refusal.rule == "already_on"


def test_the_off_time_holds_until_the_device_clock_agrees_too():
    clock = ChannelClock().energised(PowerOff(_t(0), _t(0)), PERIODS)
    clock = clock.de_energised(PowerOff(_t(120), _t(120)))
    # Station: 180 s off; device: 150 s off → 30 s to go.
    refusal = _refused(gates.check_energise, {"A": clock}, ("A",), _t(300), _t(270))
    assert refusal.details["seconds_remaining"] == 30


def test_de_energising_is_refused_when_nothing_is_on_and_for_an_unknown_channel():
    off = _off(_on(ChannelClock(), 0), 60)
    assert _refused(gates.check_de_energise, {}, None).rule == "not_on"
    assert _refused(gates.check_de_energise, {"A": off}, None).rule == "not_on"
    assert _refused(gates.check_de_energise, {"A": off, "B": _on(ChannelClock(), 70)},
                    "A").rule == "not_on"
    assert _refused(gates.check_de_energise, {"A": _on(ChannelClock(), 0)},
                    "C").rule == "unknown_channel"
    gates.check_de_energise({"A": _on(ChannelClock(), 0)}, "A")
    gates.check_de_energise({"A": off, "B": _on(ChannelClock(), 70)}, None)


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
