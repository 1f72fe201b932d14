"""The engine's usage totals: an entry must follow the last one; usage since a part's fit.

Check values are hand arithmetic over invented figures (shown beside each); the bounds are
those of webapp/domain/usage.py: engine hours rise at most by the clock hours elapsed
(physics), continuous-ignition hours at most by the engine hours (physics), starts at most
10 + 4 per clock hour (from memory), hour totals kept to 0.1 h (common practice, no source).
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest

from webapp.domain.engine import EngineState, apply_engine_event, state_as_data, state_of
from webapp.domain.errors import RuleRefusal
from webapp.domain.readings import InputProblem
from webapp.domain.usage import UsageEntry, check_entry, since_fit, usage_effect

LAST_AT = datetime(2026, 11, 30, 14, 5, tzinfo=UTC)
LAST = UsageEntry(1200.5, 840, 35.0, 12, "erosion", LAST_AT.isoformat(),
                  LAST_AT.isoformat())


def usage(hours=1200.5, starts=840, ci=35.0):
    return {"engine_hours": hours, "starts": starts, "continuous_ignition_hours": ci}


def test_the_first_entry_of_an_engine_is_taken():
    check_entry(None, usage(), LAST_AT, None)


def test_engine_hours_below_the_last_entry_are_refused_with_both_figures():
    with pytest.raises(RuleRefusal) as refused:
        check_entry(LAST, usage(hours=1180.0), LAST_AT + timedelta(days=1), None)
    assert refused.value.rule == "usage_backwards"
    assert refused.value.reason.startswith(
        "Engine hours 1180.0 is below the last entry 1200.5 (job 12, 2026-11-30 14:05 UTC)")


@pytest.mark.parametrize(("changed", "said"), [
    ({"starts": 839}, "Starts 839 is below the last entry 840"),
    ({"ci": 34.9}, "Continuous-ignition hours 34.9 is below the last entry 35.0"),
])
def test_each_total_that_goes_backwards_is_refused(changed, said):
    with pytest.raises(RuleRefusal) as refused:
        check_entry(LAST, usage(**changed), LAST_AT + timedelta(days=1), None)
    assert refused.value.rule == "usage_backwards"
    assert said in refused.value.reason


def test_the_same_totals_again_are_taken():
    # Two steps of one job a minute apart read the same figures from the records.
    check_entry(LAST, usage(), LAST_AT + timedelta(minutes=1), None)


def test_engine_hours_cannot_rise_more_than_the_clock_time_elapsed():
    # 3 h of clock time: 1200.5 + 3.0 + 0.1 (resolution) = 1203.6 h is the most allowed.
    now = LAST_AT + timedelta(hours=3)
    check_entry(LAST, usage(hours=1203.6, ci=35.0), now, None)
    with pytest.raises(RuleRefusal) as refused:
        check_entry(LAST, usage(hours=1203.7), now, None)
    assert refused.value.rule == "usage_implausible_rise"
    # 1203.7 − 1200.5 = 3.2 h of engine time in 3.0 h of clock time.
    assert "engine hours rose by 3.2 but at most 3.0 hours of clock time passed" in (
        refused.value.reason)
    assert "engine hours 1200.5, starts 840" in refused.value.reason  # the last entry's


def test_a_mistyped_digit_is_refused():
    # 12005 for 1200.5, a day later: 10804.5 h cannot pass in 24 h.
    with pytest.raises(RuleRefusal) as refused:
        check_entry(LAST, usage(hours=12005.0), LAST_AT + timedelta(days=1), None)
    assert refused.value.rule == "usage_implausible_rise"


def test_continuous_ignition_cannot_rise_more_than_engine_hours():
    # 10 days on: engine hours +5.0; continuous ignition +5.1 is within the 0.1 h
    # resolution, +5.2 is not (ignition runs only while the engine runs).
    now = LAST_AT + timedelta(days=10)
    check_entry(LAST, usage(hours=1205.5, ci=40.1), now, None)
    with pytest.raises(RuleRefusal) as refused:
        check_entry(LAST, usage(hours=1205.5, ci=40.2), now, None)
    assert "continuous-ignition hours rose by 5.2 but engine hours only by 5.0" in (
        refused.value.reason)


def test_continuous_ignition_total_cannot_exceed_the_engine_total():
    with pytest.raises(InputProblem) as problem:
        check_entry(None, usage(hours=30.0, ci=30.5, starts=20), LAST_AT, None)
    assert problem.value.field == "continuous_ignition_hours"
    assert "30.5" in problem.value.message and "30.0" in problem.value.message


def test_starts_cannot_rise_more_than_the_bound_for_the_time_elapsed():
    # 2 h of clock time: at most 10 + 4 × 2 = 18 more starts (from memory).
    now = LAST_AT + timedelta(hours=2)
    check_entry(LAST, usage(hours=1202.0, starts=858), now, None)
    with pytest.raises(RuleRefusal) as refused:
        check_entry(LAST, usage(hours=1202.0, starts=859), now, None)
    assert "starts rose by 19, more than the 18" in refused.value.reason


def test_a_late_offline_entry_of_earlier_lower_figures_is_taken():
    # Read offline at 10:00 (the tablet's time), synced at 16:00, after an entry received
    # at 14:05: its lower totals are earlier, not backwards.
    made = datetime(2026, 11, 30, 10, 0, tzinfo=UTC)
    synced = datetime(2026, 11, 30, 16, 0, tzinfo=UTC)
    check_entry(LAST, usage(hours=1197.0, starts=838, ci=34.0), synced, made)


def test_a_late_offline_entry_above_the_later_entry_is_refused():
    made = datetime(2026, 11, 30, 10, 0, tzinfo=UTC)
    synced = datetime(2026, 11, 30, 16, 0, tzinfo=UTC)
    with pytest.raises(RuleRefusal) as refused:
        check_entry(LAST, usage(hours=1201.0), synced, made)
    assert refused.value.rule == "usage_backwards"
    assert ("Engine hours 1201.0 (entered 2026-11-30 10:00 UTC) is above the later entry "
            "1200.5 (job 12, 2026-11-30 14:05 UTC)") in refused.value.reason


def test_a_late_sync_widens_the_time_allowed_rather_than_shrinking_it():
    # The tablet's clock says 14:04, a minute before the last entry, but the station got it
    # at 20:05: the engine may have run as long as 20:05 − 14:04 = 6.0 h between the two.
    made = datetime(2026, 11, 30, 14, 4, tzinfo=UTC)
    synced = datetime(2026, 11, 30, 20, 5, tzinfo=UTC)
    check_entry(LAST, usage(hours=1195.0, ci=30.0), synced, made)   # 5.5 h earlier: taken
    with pytest.raises(RuleRefusal):
        check_entry(LAST, usage(hours=1194.0, ci=30.0), synced, made)  # 6.5 h: refused


def _usage_event(job_id, at, **totals):
    return {"id": f"e{job_id}", "job_id": job_id, "step_id": "erosion",
            "kind": "reading_recorded", "received_at": at.isoformat(), "device_time": None,
            "data": {"engine": [usage_effect(usage(**totals))]}}


def test_the_engine_keeps_its_last_entry_and_a_late_one_does_not_replace_it():
    state = apply_engine_event(EngineState(), _usage_event(12, LAST_AT))
    assert state.usage == LAST
    late = _usage_event(13, LAST_AT + timedelta(hours=2), hours=1199.0, ci=34.0)
    late["device_time"] = (LAST_AT - timedelta(hours=1)).isoformat()
    after = apply_engine_event(state, late)
    assert (after.usage.job_id, after.usage.engine_hours) == (12, 1200.5)
    newer = apply_engine_event(after, _usage_event(14, LAST_AT + timedelta(days=1),
                                                   hours=1210.0))
    assert (newer.usage.job_id, newer.usage.engine_hours, newer.usage.starts) == (
        14, 1210.0, 840)
    assert state_of(state_as_data(newer)) == newer  # kept and read back alike


def test_usage_since_fit_is_each_total_minus_the_total_at_the_fit():
    # 790 − 10 = 780 h, 744 − 9 = 735 starts, 145 − 1.5 = 143.5 h continuous ignition.
    assert since_fit({"engine_hours": 790, "starts": 744, "continuous_ignition_hours": 145},
                     {"engine_hours": 10, "starts": 9, "continuous_ignition_hours": 1.5}) == {
        "engine_hours": 780, "starts": 735, "continuous_ignition_hours": 143.5}


def test_usage_since_fit_is_unknown_without_the_fit_or_below_it():
    assert since_fit({"engine_hours": 790, "starts": 744}, None) is None
    # Totals below the fit's are not of this fit (another engine, or a mistake).
    assert since_fit({"engine_hours": 5, "starts": 744}, {"engine_hours": 10, "starts": 9}) \
        is None
    # A measure missing at either end is left out; engine hours are needed.
    assert since_fit({"engine_hours": 30, "starts": 20},
                     {"engine_hours": 10, "starts": 9, "continuous_ignition_hours": 1}) == {
        "engine_hours": 20, "starts": 11}
