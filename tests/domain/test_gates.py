"""The safety gates as pure rules, alone: lockout/tagout and the discharge wait (no app, no
database). Through a job's events: test_gates_in_jobs.py; the duty cycle: test_duty_cycle.py.

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

import math
from typing import Any

import pytest

from webapp.domain import gates, tag_handover
from webapp.domain.gates import PowerOff, Tag
from webapp.domain.procedures import DischargeWait, Lockout

from .gate_events import (
    FUNCTIONAL,
    JOB,
    MECH,
    OTHER,
    OTHER_JOB,
    REMOVAL,
    _event,
    _refused,
    _step,
    _t,
    _tagged,
)

# --- step models ------------------------------------------------------------------------

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
