"""The exciter's duty cycle as pure rules: on limits, off times, overruns, and energising
refused while a channel rests (no app, no database).

Source: an exciter's duty cycle (on limit, mandatory off time) keeps it from overheating
  (FAA-H-8083-32 ch. 4: prescribed ignition time limits).

Every duty-cycle pattern and time below is invented
for the demo only (the QT-610 engine and its data are fictional).
"""

from __future__ import annotations

import pytest

from webapp.domain import gates
from webapp.domain.errors import RuleRefusal
from webapp.domain.gates import ChannelClock, DutyPeriod, PowerOff
from webapp.domain.procedures import DutyCycle

from .gate_events import (
    PERIODS,
    _refused,
    _t,
)

ON_OFF = DutyCycle.model_validate({"max_on": "2 min", "min_off": "5 min"})   # invented
CONTINUOUS = DutyCycle.model_validate({"continuous": True})


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
