"""Spark counts as the station records them (webapp.domain.spark_counts, no app, no
database): timed and tapped counts, their rate and resolution, the verdict, and both
channels together checked against A and B. Rates are counts over time, by hand: 36 snaps
in 30 s is 72 per minute, good to ±2 (one snap in 30 s). Limits and tolerances are demo
data, invented.
"""

from __future__ import annotations

import math

import pytest

from webapp.domain import spark_counts
from webapp.domain.errors import RuleRefusal
from webapp.domain.procedures import SparkCount
from webapp.domain.readings import InputProblem

EXACT = 1e-12  # exact by definition: only float rounding may separate the two

# Demo data, invented: single-channel limits 55–95/min; both channels 110–190/min, ±8/min.
COUNT_A = SparkCount.model_validate({
    "id": "count-a", "kind": "spark_count", "text": "Count unit A.", "channel": "A",
    "window": "30 s", "limits": {"min": 55, "max": 95}})
COUNT_BOTH = SparkCount.model_validate({
    "id": "count-both", "kind": "spark_count", "text": "Count both units.", "channel": "both",
    "window": "30 s", "limits": {"min": 110, "max": 190}, "both_tolerance": 8})
# Demo data, invented: A 72/min and B 68/min, each from a 30 s count (±2/min).
SINGLES = {"A": (72.0, 2.0), "B": (68.0, 2.0)}


def _timed(count, window=30):
    return {"method": "timed", "count": count, "window_s": window}


def test_a_timed_count_of_36_in_30_s_is_72_per_minute_good_to_2():
    # A rate by its definition (common practice, no source): N / T × 60 = 36 / 30 × 60
    # = 72/min; resolution 60 / 30 = ±2/min.
    stored = spark_counts.evaluate_spark_count(COUNT_A, _timed(36), {})
    assert stored["rate"] == 72.0
    assert stored["resolution"] == 2.0
    assert stored["verdict"] == "within"
    assert stored["margin"] == 17.0          # 95 − 72 and 72 − 55 = 17: the nearer limit
    assert stored["channel"] == "A"


def test_a_timed_count_typed_as_digits_is_read_as_a_whole_number():
    stored = spark_counts.evaluate_spark_count(COUNT_A, _timed(" 36 "), {})
    assert (stored["count"], stored["rate"]) == (36, 72.0)


def test_a_60_s_count_is_good_to_one_per_minute():
    stored = spark_counts.evaluate_spark_count(COUNT_A, _timed(72, window=60), {})
    assert (stored["rate"], stored["resolution"]) == (72.0, 1.0)


def test_evenly_spaced_taps_three_quarters_of_a_second_apart_are_80_per_minute():
    # common practice, no source: rate = 60 / median interval = 60 / 0.75 = 80/min.
    taps = [0.0, 0.75, 1.5, 2.25, 3.0, 3.75, 4.5]
    stored = spark_counts.evaluate_spark_count(COUNT_A, {"method": "taps", "taps": taps}, {})
    assert stored["rate"] == pytest.approx(80.0, rel=EXACT)
    assert stored["median_interval_s"] == pytest.approx(0.75, rel=EXACT)
    assert stored["resolution"] == 0.0
    assert stored["double_taps"] == [] and stored["missed"] == []
    assert stored["verdict"] == "within"


@pytest.mark.parametrize("taps", [
    None, "0 0.75 1.5", [], [0.0, 0.75], [0.0, 0.75, 0.75], [0.0, 1.5, 0.75],
    [0.0, 0.75, "x"], [0.0, 0.75, math.nan], [0.0, True, 1.5], [-1.0, 0.0, 1.0],
    [0.0, 0.01, 0.02],           # 6000/min: faster than anyone taps
])
def test_bad_taps_are_an_input_problem_at_the_taps_field(taps):
    with pytest.raises(InputProblem) as excinfo:
        spark_counts.evaluate_spark_count(COUNT_A, {"method": "taps", "taps": taps}, {})
    assert excinfo.value.field == "taps"


@pytest.mark.parametrize("count", [None, "", "thirty", -3, "-3", 36.5, "36,5", True, 10_000])
def test_bad_counts_are_an_input_problem_at_the_count_field(count):
    with pytest.raises(InputProblem) as excinfo:
        spark_counts.evaluate_spark_count(COUNT_A, _timed(count), {})
    assert excinfo.value.field == "count"


@pytest.mark.parametrize("window", [45, 0, -30, None, "30 s", True])
def test_a_window_other_than_the_step_30_s_or_60_s_is_refused(window):
    with pytest.raises(InputProblem) as excinfo:
        spark_counts.evaluate_spark_count(COUNT_A, _timed(36, window=window), {})
    assert excinfo.value.field == "window_s"


@pytest.mark.parametrize("method", [None, "", "guess"])
def test_a_count_without_a_known_method_is_refused(method):
    with pytest.raises(InputProblem) as excinfo:
        spark_counts.evaluate_spark_count(COUNT_A, {"method": method, "count": 36}, {})
    assert excinfo.value.field == "method"


@pytest.mark.parametrize("singles", [{}, {"A": (72.0, 2.0)}, {"B": (68.0, 2.0)}])
def test_both_channels_before_each_single_count_is_refused(singles):
    with pytest.raises(RuleRefusal) as excinfo:
        spark_counts.evaluate_spark_count(COUNT_BOTH, _timed(70), singles)
    assert excinfo.value.rule == "single_counts_missing"


def test_both_channels_at_a_plus_b_are_consistent():
    # Demo counts, invented: A 72 + B 68 = 140/min; both 70 in 30 s = 140/min.
    stored = spark_counts.evaluate_spark_count(COUNT_BOTH, _timed(70), SINGLES)
    assert stored["rate"] == 140.0
    assert stored["verdict"] == "within"
    check = stored["both_check"]
    assert check["result"] == "consistent"
    assert check["expected"] == 140.0
    assert check["deviation"] == 0.0
    assert check["silent_channel"] is None
    assert check["beat_period_s"] == pytest.approx(15.0, rel=EXACT)   # 60 / |72 − 68|


def test_a_combined_count_at_one_unit_s_rate_is_out_of_limits_even_at_equal_rates():
    # A = B = 72/min and 72/min heard with both on: one unit is not firing (two
    # independent units are heard near their sum: tests/domain/test_spark_trains.py).
    stored = spark_counts.evaluate_spark_count(COUNT_BOTH, _timed(36),
                                           {"A": (72.0, 2.0), "B": (72.0, 2.0)})
    assert stored["both_check"]["result"] == "one unit not firing"
    assert stored["both_check"]["beat_period_s"] is None
    assert stored["verdict"] == "out of limits"


def test_a_combined_count_below_the_step_s_minimum_is_out_of_limits_even_if_a_plus_b_agrees():
    # A 50 and B 52/min (each out of the 55-95 demo limits, dispositioned at their own
    # steps); both 51 in 30 s = 102/min ≈ A + B, yet under the step's own 110/min minimum.
    stored = spark_counts.evaluate_spark_count(COUNT_BOTH, _timed(51),
                                           {"A": (50.0, 2.0), "B": (52.0, 2.0)})
    assert stored["both_check"]["result"] == "consistent"
    assert stored["verdict"] == "out of limits"


def test_both_channels_at_a_alone_while_b_fires_on_its_own_is_one_unit_not_firing():
    # Both 36 in 30 s = 72/min ≈ A alone, though B fired 68/min on its own.
    stored = spark_counts.evaluate_spark_count(COUNT_BOTH, _timed(36), SINGLES)
    assert stored["both_check"]["result"] == "one unit not firing"
    assert stored["both_check"]["silent_channel"] == "B"
    assert stored["verdict"] == "out of limits"


def test_both_channels_neither_sum_nor_single_is_inconsistent_and_out_of_limits():
    # 55 in 30 s = 110/min: inside the step's 110–190 limits, yet 30/min short of 72 + 68.
    stored = spark_counts.evaluate_spark_count(COUNT_BOTH, _timed(55), SINGLES)
    assert stored["both_check"]["result"] == "inconsistent"
    assert stored["verdict"] == "out of limits"
