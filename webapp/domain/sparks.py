"""Spark rate by ear: taps on a tablet, a timed count, and the two-channel check.

A mechanic cannot see an exciter's spark rate; they hear the plug snap and
either tap along on the tablet or count snaps over a timed window. Both are
human measurements with human errors (a double tap, a missed snap, a count
that is only good to one snap in the window), so every result here carries
what the measurement can and cannot tell. The human count is the record; the
station only does the arithmetic and says when the count cannot decide.

Rates are sparks per minute; times are seconds.
"""

from __future__ import annotations

import math
import numbers
import statistics
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any, Literal

from .errors import RuleRefusal
from .gates import PowerOff, wait_remaining

# Beyond these the number is not a spark rate anyone timed by ear: faster than
# 10 snaps a second no hand taps along, slower than one in 10 s nobody hears a rate.
MAX_RATE_PER_MIN = 600.0
MIN_TAP_RATE_PER_MIN = 6.0
MIN_TAPS = 3
DOUBLE_TAP_FRACTION = 0.5   # an interval under half the median is a second tap on one snap
MISSED_SNAP_FRACTION = 1.5  # an interval over 1.5 medians hides at least one snap

VerdictWord = Literal["within", "near limit", "out of limits"]
BothResult = Literal["consistent", "one unit not firing", "inconsistent"]
Channel = Literal["A", "B"]

VERDICT_SYMBOLS: dict[str, str] = {"within": "✓", "near limit": "▲", "out of limits": "✗"}
BOTH_SYMBOLS: dict[str, str] = {"consistent": "✓", "one unit not firing": "✗",
                                "inconsistent": "✗"}


def _fmt(value: float) -> str:
    """A rate or time as a mechanic would write it: 72, 71.5, 0.75."""
    return f"{round(value, 2):g}"


def _number(value: object) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def _finite_at_least_zero(rule: str, what: str, value: object) -> float:
    if (not isinstance(value, numbers.Real) or isinstance(value, bool)
            or not math.isfinite(float(value))):
        raise RuleRefusal(rule, f"The {what} must be a number, not {value!r}.")
    number = float(value)
    if number < 0:
        raise RuleRefusal(rule, f"The {what} cannot be below zero (got {_fmt(number)}).")
    return number


# --- tapping along --------------------------------------------------------------------------

@dataclass(frozen=True)
class TapRate:
    """A spark rate from taps, with the taps the station thinks were not one per snap."""

    rate_per_min: float
    median_interval_s: float
    taps: int
    intervals: tuple[float, ...]
    double_taps: tuple[int, ...]            # index of the second tap of each pair
    missed: tuple[tuple[int, int], ...]     # (interval index, snaps inferred missed)
    counted_sparks: int                     # snaps heard: the taps, double taps left out
    window_s: float
    method: str = "median interval, one unit"

    @property
    def inferred_missed(self) -> int:
        """Snaps the gaps suggest were not tapped: shown beside the count, never in it."""
        return sum(count for _, count in self.missed)


def _snaps_missed(interval: float, median: float) -> int:
    # Half-up rounding (not Python's half-even) so 2.5 medians always counts as 2 missed.
    return max(1, math.floor(interval / median + 0.5) - 1)


def spark_rate_from_taps(tap_times_s: Sequence[float], one_unit: bool = True) -> TapRate:
    """Rate = 60 / median interval between taps; flags double taps and missed snaps.

    The median keeps one stray tap or one missed snap from moving the rate; the
    flags say where the tapping and the snaps parted ways. They assume one unit's
    regular train: with both units on (`one_unit=False`) the snaps of two independent
    trains fall at unrelated moments, so short and long intervals are real, nothing is
    flagged, and the rate is the mean over the taps: (taps − 1) / (last − first) × 60.
    """
    times = list(tap_times_s)
    if len(times) < MIN_TAPS:
        raise RuleRefusal("too_few_taps", f"Only {len(times)} tap(s) recorded: tap at least "
                          f"{MIN_TAPS} snaps so there are two intervals to time.",
                          taps=len(times))
    for index, value in enumerate(times):
        if not _number(value):
            raise RuleRefusal("tap_time_invalid", f"Tap {index + 1} has no usable time "
                              f"({value!r}); clear the taps and tap again.", index=index)
        if not math.isfinite(float(value)):
            raise RuleRefusal("tap_time_not_finite", f"Tap {index + 1} has no usable time "
                              f"({value!r}); clear the taps and tap again.", index=index)
        if value < 0:
            raise RuleRefusal("tap_time_negative", f"Tap {index + 1} is timed before the "
                              f"start ({_fmt(value)} s); clear the taps and tap again.",
                              index=index)
    floats = [float(t) for t in times]
    intervals = tuple(later - earlier for earlier, later in zip(floats, floats[1:], strict=False))
    for index, interval in enumerate(intervals):
        if interval <= 0:
            raise RuleRefusal("taps_not_increasing", f"Tap {index + 2} is not later than tap "
                              f"{index + 1}; the tap times must go forward. Clear the taps "
                              f"and tap again.", index=index + 1)

    median = statistics.median(intervals)
    rate = 60.0 / median if one_unit else (len(floats) - 1) / (floats[-1] - floats[0]) * 60.0
    if rate > MAX_RATE_PER_MIN:
        raise RuleRefusal("spark_rate_implausible", f"The taps come {_fmt(median)} s apart, "
                          f"{_fmt(rate)} a minute: faster than 10 snaps a second, more than "
                          f"a hand can tap along with. Tap once for each snap you hear, or "
                          f"count snaps over a timed window.", rate_per_min=rate)
    if rate < MIN_TAP_RATE_PER_MIN:
        raise RuleRefusal("spark_rate_implausible", f"The taps come {_fmt(median)} s apart, "
                          f"{_fmt(rate)} a minute: slower than one snap every 10 seconds, "
                          f"too slow to time by tapping. Count snaps over a timed window "
                          f"instead.", rate_per_min=rate)

    if not one_unit:
        return TapRate(rate_per_min=rate, median_interval_s=median, taps=len(floats),
                       intervals=intervals, double_taps=(), missed=(),
                       counted_sparks=len(floats), window_s=floats[-1] - floats[0],
                       method="mean rate, two independent units")
    double_taps = tuple(index + 1 for index, interval in enumerate(intervals)
                        if interval < DOUBLE_TAP_FRACTION * median)
    missed = tuple((index, _snaps_missed(interval, median))
                   for index, interval in enumerate(intervals)
                   if interval > MISSED_SNAP_FRACTION * median)
    return TapRate(rate_per_min=rate, median_interval_s=median, taps=len(floats),
                   intervals=intervals, double_taps=double_taps, missed=missed,
                   counted_sparks=len(floats) - len(double_taps),
                   window_s=floats[-1] - floats[0])


# --- a timed count --------------------------------------------------------------------------

@dataclass(frozen=True)
class TimedRate:
    """A spark rate from snaps counted over a timed window, good to one snap in the window."""

    count: int
    window_s: float
    rate_per_min: float
    resolution_per_min: float   # ± one snap in the window, as a rate


def spark_rate_from_count(count: int, window_s: float) -> TimedRate:
    """Rate = N / T × 60 per minute, resolution ±60 / T (a 30 s count is good to ±2)."""
    if not isinstance(count, numbers.Integral) or isinstance(count, bool):
        raise RuleRefusal("spark_count_invalid", f"The count must be a whole number of "
                          f"snaps, not {count!r}.")
    if count < 0:
        raise RuleRefusal("spark_count_invalid", f"The count cannot be below zero "
                          f"(got {count}).")
    if not _number(window_s) or not math.isfinite(float(window_s)) or window_s <= 0:
        raise RuleRefusal("count_window_invalid", f"The counting window must be a number of "
                          f"seconds above zero, not {window_s!r}.")
    window = float(window_s)
    if count > window * MAX_RATE_PER_MIN / 60.0:
        raise RuleRefusal("spark_count_implausible", f"{count} snaps in {_fmt(window)} s is "
                          f"more than 10 a second, more than anyone counts by ear. Check "
                          f"the count and the window.", count=int(count), window_s=window)
    return TimedRate(count=int(count), window_s=window, rate_per_min=count / window * 60.0,
                     resolution_per_min=60.0 / window)


def check_window_served(started: PowerOff | None, counted: Mapping[str, Any], now: datetime,
                        device_now: datetime | None) -> None:
    """A count is taken over time the station saw pass: its window (or tapping) was started
    on the station, and the count arrives no sooner than the window (or the taps' span)
    after it, by the station's clock and, where known, the device's. A count typed in ahead
    of its window is refused."""
    if started is None:
        raise RuleRefusal("count_not_started", "Start the window (or the tapping) on the "
                          "tablet first: the station times the count from then.")
    needed = float(counted.get("window_s") or 0.0)
    left = wait_remaining(needed, started, now, device_now)
    if left > 0:
        whole = int(left) + (left % 1 > 0)
        raise RuleRefusal("count_window_open", f"The counting window is not over: {whole} s "
                          "to go. Count to the end of the window, then enter the count.",
                          seconds_remaining=whole)


# --- against the limits ---------------------------------------------------------------------

@dataclass(frozen=True)
class Verdict:
    """A spark rate against its limits; `margin` is to the nearest limit, negative outside."""

    rate: float
    low: float
    high: float
    resolution: float
    verdict: VerdictWord
    symbol: str
    margin: float
    message: str

    @property
    def label(self) -> str:
        """Symbol and word together, so the verdict never rests on colour or symbol alone."""
        return f"{self.symbol} {self.verdict}"


def rate_verdict(rate: float, low: float, high: float, resolution: float = 0) -> Verdict:
    """Within, near limit or out of limits (limits inclusive), by a guard-banded decision
    rule: the count's resolution narrows the acceptance zone and never widens it (ISO
    14253-1:2017 decision rules; ILAC-G8:09/2019 guard band).

    A rate outside the limits is out of limits, however close. A rate inside them but less
    than one resolution step from a limit is "near limit": the count cannot prove it inside
    (count again over a longer window); exactly one step inside, it can.
    """
    rate = _finite_at_least_zero("spark_rate_invalid", "spark rate", rate)
    low = _finite_at_least_zero("rate_limits_invalid", "low limit", low)
    high = _finite_at_least_zero("rate_limits_invalid", "high limit", high)
    if low > high:
        raise RuleRefusal("rate_limits_invalid", f"The low limit ({_fmt(low)}) is above the "
                          f"high limit ({_fmt(high)}).")
    resolution = _finite_at_least_zero("resolution_invalid", "count resolution", resolution)

    to_low, to_high = rate - low, high - rate
    margin = min(to_low, to_high)
    nearest, limit = ("low", low) if to_low <= to_high else ("high", high)
    reading = f"{_fmt(rate)} ± {_fmt(resolution)}/min" if resolution else f"{_fmt(rate)}/min"
    limits = f"{_fmt(low)}–{_fmt(high)}/min"
    word: VerdictWord
    if margin >= 0 and margin < resolution:
        word = "near limit"
        message = (f"{reading} is inside {limits} but less than the count's resolution from "
                   f"the {nearest} limit of {_fmt(limit)}: the count cannot prove it inside; "
                   f"count again over a longer window.")
    elif margin >= 0:
        word = "within"
        message = (f"{reading} is within {limits}, {_fmt(margin)}/min inside the "
                   f"{nearest} limit.")
    else:
        word = "out of limits"
        side = "below" if rate < low else "above"
        message = (f"{reading} is out of limits: {_fmt(-margin)}/min {side} the {nearest} "
                   f"limit of {_fmt(limit)}.")
    return Verdict(rate=rate, low=low, high=high, resolution=resolution, verdict=word,
                   symbol=VERDICT_SYMBOLS[word], margin=margin, message=message)


# --- both channels together -----------------------------------------------------------------

@dataclass(frozen=True)
class BothCheck:
    """Both units firing together against the sum of their own rates."""

    rate_a: float
    rate_b: float
    rate_both: float
    tolerance: float
    resolution: float
    expected: float
    deviation: float
    beat_period_s: float | None     # None when A and B are equal: they never drift apart
    result: BothResult
    symbol: str
    silent_channel: Channel | None  # the unit not firing, when the check can name it
    message: str


def two_channel_check(rate_a: float, rate_b: float, rate_both: float, tolerance: float,
                      resolution: float = 0) -> BothCheck:
    """Combined ≈ A + B, or not: combined ≈ one channel → the other is not firing.

    Two independent units are not synchronised: even at nearly equal rates their snaps
    fall at unrelated moments (each unit's spark gap fires when its own capacitor reaches
    breakdown), so the ear hears about A + B, not one train; a combined count near one
    unit's rate means one unit is not firing, never "lock-step". (The simulation in
    tests/domain/test_spark_trains.py shows it.) `beat_period_s` = 1/|fA − fB| is reported
    as what the ear hears as the uneven rhythm. The count's resolution widens every
    comparison, since each rate is only good to it.
    """
    a = _finite_at_least_zero("spark_rate_invalid", "rate of unit A", rate_a)
    b = _finite_at_least_zero("spark_rate_invalid", "rate of unit B", rate_b)
    both = _finite_at_least_zero("spark_rate_invalid", "rate with both units", rate_both)
    tolerance = _finite_at_least_zero("tolerance_invalid", "tolerance", tolerance)
    resolution = _finite_at_least_zero("resolution_invalid", "count resolution", resolution)

    expected = a + b
    deviation = both - expected
    allowance = tolerance + resolution
    beat = None if a == b else 60.0 / abs(a - b)   # f in Hz = rate / 60
    firing_a, firing_b = a > allowance, b > allowance
    sums = f"{_fmt(both)}/min with both units against {_fmt(a)} + {_fmt(b)} = {_fmt(expected)}"

    result: BothResult
    silent: Channel | None = None
    if abs(deviation) <= allowance:
        result = "consistent"
        message = (f"{sums}/min expected: consistent, within ±{_fmt(tolerance)}/min "
                   f"tolerance and ±{_fmt(resolution)}/min count resolution.")
    else:
        matches_a = firing_b and abs(both - a) <= allowance
        matches_b = firing_a and abs(both - b) <= allowance
        if matches_a or matches_b:
            result = "one unit not firing"
            if matches_a and matches_b and abs(both - a) == abs(both - b):
                silent = None
            elif matches_a and (not matches_b or abs(both - a) < abs(both - b)):
                silent = "B"
            else:
                silent = "A"
            if silent is None:
                message = (f"{sums}/min expected: the combined rate matches one unit alone, "
                           f"so one unit is not firing when both are selected, though each "
                           f"fired on its own.")
            else:
                heard: Channel = "A" if silent == "B" else "B"
                own = b if silent == "B" else a
                message = (f"{sums}/min expected: the combined rate matches unit {heard} "
                           f"alone, so unit {silent} is not firing when both are selected, "
                           f"though it fired {_fmt(own)}/min on its own.")
        else:
            result = "inconsistent"
            message = (f"{sums}/min expected: {_fmt(abs(deviation))}/min "
                       f"{'short' if deviation < 0 else 'over'}, beyond the "
                       f"±{_fmt(tolerance)}/min tolerance and ±{_fmt(resolution)}/min count "
                       f"resolution. Count again, each unit alone and both together.")
    return BothCheck(rate_a=a, rate_b=b, rate_both=both, tolerance=tolerance,
                     resolution=resolution, expected=expected, deviation=deviation,
                     beat_period_s=beat, result=result, symbol=BOTH_SYMBOLS[result],
                     silent_channel=silent, message=message)
