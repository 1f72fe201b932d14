"""Spark rate by ear: taps, timed counts, verdicts and the two-channel check, by hand arithmetic.

Formulas (common practice, no source): rate = 60 / median tap interval; double tap < 0.5 × median;
missed snap > 1.5 × median; timed count N / T × 60, resolution ±60/T; combined ≈ A + B,
beat period 1/|fA − fB|. numpy is the outside reference for median and diff.

The 60–100/min limits: spark rate 60–100 per minute per unit — common practice, no source.
The functional-check counts and the tolerance are demo data, invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from webapp.domain.errors import RuleRefusal
from webapp.domain.sparks import (
    rate_verdict,
    spark_rate_from_count,
    spark_rate_from_taps,
    two_channel_check,
)

LOW, HIGH = 60.0, 100.0   # common practice, no source
DEMO_TOLERANCE = 5.0      # demo data, invented: the trainer's allowance on the combined count
RESOLUTION_30S = 2.0      # 60 / 30 s


# --- taps -----------------------------------------------------------------------------------

def test_evenly_spaced_taps_at_three_quarters_of_a_second_give_80_per_minute():
    # 5 taps 0.75 s apart: 4 intervals of 0.75 s; 60 / 0.75 = 80/min; window 3.0 s.
    result = spark_rate_from_taps([0.0, 0.75, 1.5, 2.25, 3.0])
    assert result.rate_per_min == 80.0
    assert result.median_interval_s == 0.75
    assert result.intervals == (0.75, 0.75, 0.75, 0.75)
    assert result.taps == 5
    assert result.double_taps == ()
    assert result.missed == ()
    assert result.counted_sparks == 5
    assert result.window_s == 3.0


def test_a_double_tap_is_flagged_and_not_counted_as_a_spark():
    # Snaps every 0.75 s, an extra tap 0.1 s after the one at 1.5 s (tap index 3).
    # Intervals 0.75, 0.75, 0.1, 0.65, 0.75, 0.75 → median 0.75 → 80/min.
    # 0.1 < 0.5 × 0.75 = 0.375 → tap 3 is a double tap; 0.65 is not. Sparks 7 − 1 = 6.
    result = spark_rate_from_taps([0.0, 0.75, 1.5, 1.6, 2.25, 3.0, 3.75])
    assert result.rate_per_min == pytest.approx(80.0, rel=1e-12)
    assert result.double_taps == (3,)
    assert result.missed == ()
    assert result.taps == 7
    assert result.counted_sparks == 6


def test_a_missed_snap_is_flagged_as_inferred_and_never_added_to_the_count():
    # Intervals 0.75, 0.75, 1.5, 0.75, 0.75 → median 0.75 → 80/min.
    # 1.5 > 1.5 × 0.75 = 1.125 → interval 2 hides round(1.5 / 0.75) − 1 = 1 snap: inferred,
    # shown as such; the count is the 6 taps heard.
    result = spark_rate_from_taps([0.0, 0.75, 1.5, 3.0, 3.75, 4.5])
    assert result.rate_per_min == 80.0
    assert result.missed == ((2, 1),)
    assert result.inferred_missed == 1
    assert result.double_taps == ()
    assert result.counted_sparks == 6


def test_a_long_gap_counts_every_snap_it_hides():
    # Intervals 0.75, 0.75, 2.25, 0.75, 0.75 → median 0.75; 2.25 / 0.75 = 3 → 2 missed.
    result = spark_rate_from_taps([0.0, 0.75, 1.5, 3.75, 4.5, 5.25])
    assert result.missed == ((2, 2),)
    assert (result.inferred_missed, result.counted_sparks) == (2, 6)


JITTERED_TAPS = [0.00, 0.81, 1.55, 2.37, 3.09, 3.92, 4.66, 5.49, 6.20, 7.04]


def test_jittered_taps_rate_is_sixty_over_numpy_median_of_numpy_diff():
    reference = 60.0 / float(np.median(np.diff(JITTERED_TAPS)))
    result = spark_rate_from_taps(JITTERED_TAPS)
    assert result.rate_per_min == pytest.approx(reference, rel=1e-12)
    assert result.intervals == pytest.approx(list(np.diff(JITTERED_TAPS)), rel=1e-12)
    assert result.window_s == pytest.approx(7.04, rel=1e-12)
    # jitter stays inside 0.5–1.5 medians: nothing flagged, every tap a spark
    assert (result.double_taps, result.missed, result.counted_sparks) == ((), (), 10)


def test_taps_accept_a_numpy_array():
    result = spark_rate_from_taps(np.array([0.0, 0.75, 1.5]))
    assert result.rate_per_min == 80.0


@pytest.mark.parametrize("taps", [[], [0.0], [0.0, 0.75]])
def test_fewer_than_three_taps_is_refused(taps):
    with pytest.raises(RuleRefusal) as refused:
        spark_rate_from_taps(taps)
    assert refused.value.rule == "too_few_taps"
    assert "tap at least 3 snaps" in refused.value.reason


@pytest.mark.parametrize("taps, rule", [
    ([0.0, 1.5, 0.75], "taps_not_increasing"),
    ([0.0, 0.75, 0.75, 1.5], "taps_not_increasing"),
    ([0.0, math.nan, 1.5], "tap_time_not_finite"),
    ([0.0, 0.75, math.inf], "tap_time_not_finite"),
    ([-0.75, 0.0, 0.75], "tap_time_negative"),
    ([0.0, "0.75", 1.5], "tap_time_invalid"),
    ([0.0, True, 2.0], "tap_time_invalid"),
])
def test_bad_tap_times_are_refused(taps, rule):
    with pytest.raises(RuleRefusal) as refused:
        spark_rate_from_taps(taps)
    assert refused.value.rule == rule


@pytest.mark.parametrize("spacing_s", [0.0625, 10.5])
def test_implausible_tap_rates_are_refused_in_words(spacing_s):
    # 0.0625 s apart → 60 / 0.0625 = 960/min (> 600); 10.5 s apart → 5.71/min (< 6)
    with pytest.raises(RuleRefusal) as refused:
        spark_rate_from_taps([0.0, spacing_s, 2 * spacing_s])
    assert refused.value.rule == "spark_rate_implausible"
    assert "10" in refused.value.reason  # "10 snaps a second" / "every 10 seconds"


@pytest.mark.parametrize("spacing_s, rate", [(0.125, 480.0), (10.0, 6.0)])
def test_the_plausibility_limits_themselves_are_accepted(spacing_s, rate):
    # 60 / 0.125 = 480/min; 60 / 10 = 6/min, the slow limit itself
    assert spark_rate_from_taps([0.0, spacing_s, 2 * spacing_s]).rate_per_min == rate


# --- timed count ----------------------------------------------------------------------------

def test_36_snaps_in_30_seconds_is_72_per_minute_plus_or_minus_2():
    # 36 / 30 × 60 = 72/min; resolution 60 / 30 = ±2/min
    result = spark_rate_from_count(36, 30.0)
    assert result.rate_per_min == 72.0
    assert result.resolution_per_min == 2.0
    assert (result.count, result.window_s) == (36, 30.0)


def test_a_longer_count_is_finer():
    # 72 in 60 s → 72/min, ±1/min
    result = spark_rate_from_count(72, 60)
    assert (result.rate_per_min, result.resolution_per_min) == (72.0, 1.0)


def test_zero_snaps_is_a_reading_not_an_error():
    assert spark_rate_from_count(0, 30.0).rate_per_min == 0.0


def test_ten_snaps_a_second_is_the_most_accepted():
    # 300 in 30 s = 600/min, the limit itself; 301 is one too many
    assert spark_rate_from_count(300, 30.0).rate_per_min == 600.0
    with pytest.raises(RuleRefusal) as refused:
        spark_rate_from_count(301, 30.0)
    assert refused.value.rule == "spark_count_implausible"


@pytest.mark.parametrize("count, window_s, rule", [
    (-1, 30.0, "spark_count_invalid"),
    (36.5, 30.0, "spark_count_invalid"),
    (36.0, 30.0, "spark_count_invalid"),
    (True, 30.0, "spark_count_invalid"),
    (36, 0.0, "count_window_invalid"),
    (36, -30.0, "count_window_invalid"),
    (36, math.nan, "count_window_invalid"),
    (36, math.inf, "count_window_invalid"),
    (5000, 30.0, "spark_count_implausible"),
])
def test_bad_counts_are_refused(count, window_s, rule):
    with pytest.raises(RuleRefusal) as refused:
        spark_rate_from_count(count, window_s)
    assert refused.value.rule == rule


# --- verdict against the limits -------------------------------------------------------------

@pytest.mark.parametrize("rate, resolution, verdict, symbol, margin", [
    (80.0, 2.0, "within", "✓", 20.0),
    # exactly at a limit: with no resolution the limit counts as inside
    (60.0, 0.0, "within", "✓", 0.0),
    (100.0, 0.0, "within", "✓", 0.0),
    (59.0, 0.0, "out of limits", "✗", -1.0),
    (101.0, 0.0, "out of limits", "✗", -1.0),
    # a 30 s count (±2), ISO 14253-1 guard band: inside but less than a step from a limit,
    # the count cannot prove it inside ("near limit"); outside is out, however close
    (60.0, 2.0, "near limit", "▲", 0.0),
    (100.0, 2.0, "near limit", "▲", 0.0),
    (61.0, 2.0, "near limit", "▲", 1.0),
    (99.0, 2.0, "near limit", "▲", 1.0),
    (101.0, 2.0, "out of limits", "✗", -1.0),
    (59.0, 2.0, "out of limits", "✗", -1.0),
    (100.5, 60.0, "out of limits", "✗", -0.5),   # a coarse count never widens the limits
    # one step inside / outside: the count can tell
    (62.0, 2.0, "within", "✓", 2.0),
    (98.0, 2.0, "within", "✓", 2.0),
    (58.0, 2.0, "out of limits", "✗", -2.0),
    (102.0, 2.0, "out of limits", "✗", -2.0),
])
def test_verdict_at_and_around_the_limits(rate, resolution, verdict, symbol, margin):
    result = rate_verdict(rate, LOW, HIGH, resolution)
    assert (result.verdict, result.symbol) == (verdict, symbol)
    assert result.margin == margin
    assert result.label == f"{symbol} {verdict}"
    assert result.message


def test_out_of_limits_message_names_the_side_and_the_limit():
    assert "below the low limit of 60" in rate_verdict(55.0, LOW, HIGH).message
    assert "above the high limit of 100" in rate_verdict(104.0, LOW, HIGH).message


@pytest.mark.parametrize("rate, low, high, resolution, rule", [
    (math.nan, LOW, HIGH, 0.0, "spark_rate_invalid"),
    (-1.0, LOW, HIGH, 0.0, "spark_rate_invalid"),
    (80.0, HIGH, LOW, 0.0, "rate_limits_invalid"),
    (80.0, LOW, math.inf, 0.0, "rate_limits_invalid"),
    (80.0, LOW, HIGH, -2.0, "resolution_invalid"),
])
def test_bad_verdict_inputs_are_refused(rate, low, high, resolution, rule):
    with pytest.raises(RuleRefusal) as refused:
        rate_verdict(rate, low, high, resolution)
    assert refused.value.rule == rule


# --- both channels --------------------------------------------------------------------------

def test_demo_functional_check_is_consistent():
    # Demo data, invented: A 36/30 s = 72, B 34/30 s = 68, both 70/30 s = 140 (each ±2).
    # Expected 72 + 68 = 140, deviation 0; beat period 60 / |72 − 68| = 15 s.
    a, b, both = (spark_rate_from_count(n, 30.0) for n in (36, 34, 70))
    assert (a.rate_per_min, b.rate_per_min, both.rate_per_min) == (72.0, 68.0, 140.0)
    result = two_channel_check(a.rate_per_min, b.rate_per_min, both.rate_per_min,
                               DEMO_TOLERANCE, a.resolution_per_min)
    assert result.result == "consistent"
    assert result.symbol == "✓"
    assert (result.expected, result.deviation) == (140.0, 0.0)
    assert result.beat_period_s == 15.0
    assert result.silent_channel is None


def test_combined_short_by_more_than_tolerance_plus_resolution_is_not_consistent():
    # 140 expected; 132 is 8 short, beyond 5 + 2 = 7 → inconsistent; 133 is 7 short → consistent
    assert two_channel_check(72, 68, 133, DEMO_TOLERANCE, RESOLUTION_30S).result == "consistent"
    result = two_channel_check(72, 68, 132, DEMO_TOLERANCE, RESOLUTION_30S)
    assert result.result == "inconsistent"
    assert result.deviation == -8.0
    assert "8/min short" in result.message


@pytest.mark.parametrize("both, silent", [(90.0, "B"), (66.0, "A"), (92.0, "B")])
def test_combined_matching_one_unit_alone_means_the_other_is_not_firing(both, silent):
    # A 90, B 66, both firing on their own; combined 90 (or 92, within 5 + 2) ≈ A alone → B
    # silent; combined 66 ≈ B alone → A silent. Expected 156, so never consistent.
    result = two_channel_check(90.0, 66.0, both, DEMO_TOLERANCE, RESOLUTION_30S)
    assert result.result == "one unit not firing"
    assert result.silent_channel == silent
    assert result.symbol == "✗"
    assert f"unit {silent} is not firing" in result.message


def test_a_unit_that_never_fired_alone_is_not_blamed_by_the_combined_count():
    # B 0 on its own: combined 72 ≈ 72 + 0 → consistent, not "one unit not firing"
    assert two_channel_check(72.0, 0.0, 72.0, DEMO_TOLERANCE, RESOLUTION_30S).result == \
        "consistent"


def test_equal_rates_heard_as_one_mean_one_unit_is_not_firing():
    # A = B = 72 (36/30 s each): beat period 1 / 0 → infinite, reported as None. Two
    # independent units are heard near 144/min (tests/domain/test_spark_trains.py), so a
    # combined 72 means one is not firing; which one, the count cannot say.
    result = two_channel_check(72.0, 72.0, 72.0, DEMO_TOLERANCE, RESOLUTION_30S)
    assert result.result == "one unit not firing"
    assert result.symbol == "✗"
    assert result.beat_period_s is None
    assert result.silent_channel is None


def test_rates_within_one_resolution_step_are_judged_like_any_other():
    # A 72, B 71: beat 60 / |72 − 71| = 60 s; a combined 72 ≈ A alone → B not firing.
    result = two_channel_check(72.0, 71.0, 72.0, DEMO_TOLERANCE, RESOLUTION_30S)
    assert result.result == "one unit not firing" and result.silent_channel == "B"
    assert result.beat_period_s == pytest.approx(60.0, rel=1e-12)
    assert two_channel_check(72.0, 71.0, 143.0, DEMO_TOLERANCE, RESOLUTION_30S).result == \
        "consistent"


def test_rates_one_full_step_apart_drift_apart_within_the_count():
    # A 72, B 70: beat 60 / 2 = 30 s, not longer than the 30 s count → the check decides.
    # Combined 72 ≈ A (0 away) and ≈ B (2 away), both within 7: the nearer, A, was heard.
    result = two_channel_check(72.0, 70.0, 72.0, DEMO_TOLERANCE, RESOLUTION_30S)
    assert result.beat_period_s == 30.0
    assert result.result == "one unit not firing"
    assert result.silent_channel == "B"


def test_combined_far_from_everything_is_inconsistent():
    # 72 + 68 = 140 expected; 100 is 40 short and 28+ from either unit alone
    result = two_channel_check(72.0, 68.0, 100.0, DEMO_TOLERANCE, RESOLUTION_30S)
    assert result.result == "inconsistent"
    assert result.symbol == "✗"
    assert result.deviation == -40.0


@pytest.mark.parametrize("args, rule", [
    ((math.nan, 68.0, 140.0, 5.0, 2.0), "spark_rate_invalid"),
    ((72.0, -68.0, 140.0, 5.0, 2.0), "spark_rate_invalid"),
    ((72.0, 68.0, math.inf, 5.0, 2.0), "spark_rate_invalid"),
    ((72.0, 68.0, 140.0, -5.0, 2.0), "tolerance_invalid"),
    ((72.0, 68.0, 140.0, 5.0, math.nan), "resolution_invalid"),
])
def test_bad_two_channel_inputs_are_refused(args, rule):
    with pytest.raises(RuleRefusal) as refused:
        two_channel_check(*args)
    assert refused.value.rule == rule
