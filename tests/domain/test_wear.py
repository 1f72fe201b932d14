"""Igniter plug wear: the Theil–Sen trend, the remaining-life verdict and its boundaries.

References: numpy.polyfit and scipy.stats.theilslopes computed here, independently of
the module; hand computations written beside each check. The demo plug's readings, the
1.20 mm limit and the 200 FH interval are demo data, invented (demo_scenarios/bramblecoast.yaml).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from scipy.stats import theilslopes

from webapp.domain.errors import RuleRefusal
from webapp.domain.wear import (
    BRING_FORWARD,
    FLEET_POOLED,
    GO_NO_GO,
    NOT_ENOUGH,
    OK,
    OWN_HISTORY,
    REPLACE_NOW,
    WearFit,
    WearPoint,
    best_usage_measure,
    forecast,
    pooled_rate,
    wear_rate,
)

# Demo data, invented: the fast-wearing plug on the continuous-ignition channel.
DEMO_FH = [210.0, 405.0, 600.0, 790.0]
DEMO_STARTS = [190.0, 372.0, 561.0, 744.0]
DEMO_CI_HOURS = [31.0, 64.0, 102.0, 145.0]
DEMO_EROSION = [0.22, 0.41, 0.71, 1.02]
DEMO_LIMIT = 1.20       # mm, demo data, invented
DEMO_INTERVAL = 200.0   # FH, demo data, invented

# Demo data, invented: a plug wearing at an ordinary, steady rate.
ORDINARY_FH = [200.0, 400.0, 600.0, 800.0]
ORDINARY_EROSION = [0.07, 0.14, 0.21, 0.28]

REL = 1e-12  # module against an independent reference: only float rounding between them


def _points(usages, erosions, **kwargs):
    return [WearPoint(u, e, **kwargs) for u, e in zip(usages, erosions, strict=True)]


# --- the fit against numpy and scipy --------------------------------------------------------

def test_noise_free_line_gives_the_least_squares_and_theil_sen_slope():
    usage = np.array([100.0, 250.0, 420.0, 600.0, 815.0])
    erosion = 0.05 + 0.0012 * usage  # hand-made line: 0.0012 mm/FH from 0.05 mm
    fit = wear_rate(_points(usage.tolist(), erosion.tolist()))
    assert not fit.too_few
    assert fit.points_used == 5
    # numpy / scipy references
    assert fit.slope_mm_per_unit == pytest.approx(np.polyfit(usage, erosion, 1)[0], rel=REL)
    assert fit.slope_mm_per_unit == pytest.approx(theilslopes(erosion, usage).slope, rel=REL)
    assert fit.slope_mm_per_unit == pytest.approx(0.0012, rel=REL)  # hand: the line's slope
    assert fit.intercept_mm == pytest.approx(0.05, rel=1e-9)        # hand: the line's intercept


def test_one_misread_gauge_does_not_drag_the_theil_sen_slope_but_drags_least_squares():
    rng = np.random.default_rng(2207)
    usage = np.arange(0.0, 1001.0, 50.0)
    true_slope = 0.0012  # hand-chosen: mm/FH
    erosion = 0.05 + true_slope * usage + rng.normal(0.0, 0.01, usage.size)
    erosion[-1] += 0.6   # one gauge misread by 0.6 mm, at the far end where it pulls hardest
    fit = wear_rate(_points(usage.tolist(), erosion.tolist()))
    assert fit.slope_mm_per_unit is not None
    assert abs(fit.slope_mm_per_unit - true_slope) < 0.03 * true_slope
    least_squares = np.polyfit(usage, erosion, 1)[0]  # numpy reference, pulled by the outlier
    assert abs(least_squares - true_slope) > 0.10 * true_slope
    assert fit.slope_mm_per_unit == pytest.approx(theilslopes(erosion, usage).slope, rel=REL)


# --- the demo plug and an ordinary plug -----------------------------------------------------

def test_demo_plug_slope_and_band_match_scipy_and_the_hand_median():
    fit = wear_rate(_points(DEMO_FH, DEMO_EROSION))
    reference = theilslopes(DEMO_EROSION, DEMO_FH, alpha=0.90)  # scipy reference
    assert fit.slope_mm_per_unit == pytest.approx(reference.slope, rel=REL)
    assert fit.intercept_mm == pytest.approx(reference.intercept, rel=REL)
    assert fit.low_slope == pytest.approx(reference.low_slope, rel=REL)
    assert fit.high_slope == pytest.approx(reference.high_slope, rel=REL)
    # Hand: the six pairwise slopes (mm/FH), sorted:
    #   0.19/195 = 0.000974, 0.49/390 = 0.001256, 0.80/580 = 0.001379,
    #   0.30/195 = 0.001538, 0.61/385 = 0.001584, 0.31/190 = 0.001632.
    # Median = (0.80/580 + 0.30/195)/2 = 0.001459 mm/FH. (0.00138 is the end-to-end slope
    # 0.80/580 from 210 to 790 FH, not the Theil–Sen median.)
    assert fit.slope_mm_per_unit == pytest.approx((0.80 / 580 + 0.30 / 195) / 2, rel=1e-9)
    # Hand: Sen's variance for n = 4 without ties is 4·3·13/18 = 8.667, σ = 2.944,
    # z(0.95) = 1.645, z·σ = 4.84; the 90 % band is the sorted slopes at
    # round((6 − 4.84)/2) − 1 = 0 and round((6 + 4.84)/2) = 5: the smallest and largest.
    assert fit.low_slope == pytest.approx(0.19 / 195, rel=1e-9)
    assert fit.high_slope == pytest.approx(0.31 / 190, rel=1e-9)


def test_demo_plug_at_790_fh_is_replaced_at_this_visit():
    result = forecast(_points(DEMO_FH, DEMO_EROSION), DEMO_LIMIT, 790.0, DEMO_INTERVAL,
                      unit="engine hours")
    # Hand: intercept = median(y) − slope·median(x) = 0.56 − 0.0014589·502.5 = −0.17309 mm;
    # the trend at 790 FH is −0.17309 + 0.0014589·790 = 0.9794 mm, below the 1.02 mm
    # measured, so wear now is the measured 1.02 mm (never forecast less than measured).
    assert result.wear_now_mm == pytest.approx(1.02, rel=REL)
    # Hand: conservative remaining = (1.20 − 1.02) / (0.31/190) = 0.18·190/0.31 = 110.32 FH;
    # central = 0.18 / 0.0014589 = 123.38 FH. Even the central figure is short of the
    # 200 FH to the next inspection, so the plug is changed now, while it is out.
    assert result.remaining_usage_conservative == pytest.approx(0.18 * 190 / 0.31, rel=1e-9)
    assert result.remaining_usage_conservative == pytest.approx(110.32, abs=0.01)
    assert result.remaining_usage == pytest.approx(0.18 / ((0.80 / 580 + 0.30 / 195) / 2),
                                                   rel=1e-9)
    assert result.remaining_usage == pytest.approx(123.38, abs=0.01)
    assert result.verdict == REPLACE_NOW
    assert result.symbol == "✗"
    assert result.margin == pytest.approx(0.18 * 190 / 0.31 - 200, rel=1e-9)
    assert result.rate_source == OWN_HISTORY
    assert "replace the plug at this visit" in result.reason


def test_only_the_fast_rate_falling_short_brings_the_inspection_forward():
    usage, erosion = [0.0, 100.0, 200.0, 300.0], [0.0, 0.10, 0.25, 0.30]  # hand-made data
    fit = stats.theilslopes(erosion, usage, alpha=0.90)  # scipy reference
    wear_now = max(fit.intercept + fit.slope * 300.0, 0.30)
    central, fast = (1.0 - wear_now) / fit.slope, (1.0 - wear_now) / fit.high_slope
    interval = (central + fast) / 2          # between the two: only the fast rate falls short
    assert fast < interval <= central
    result = forecast(_points(usage, erosion), 1.0, 300.0, interval)
    assert result.verdict == BRING_FORWARD and result.symbol == "▲"
    assert result.remaining_usage == pytest.approx(central, rel=1e-9)
    assert result.remaining_usage_conservative == pytest.approx(fast, rel=1e-9)


def test_ordinary_plug_is_ok_to_next_inspection_with_its_margin():
    result = forecast(_points(ORDINARY_FH, ORDINARY_EROSION), DEMO_LIMIT, 800.0, DEMO_INTERVAL,
                      unit="engine hours")
    # Hand: every pairwise slope is 0.07/200 = 0.00035 mm/FH, so the band is that too;
    # intercept 0.175 − 0.00035·500 = 0, wear at 800 FH = 0.28 mm;
    # remaining = (1.20 − 0.28)/0.00035 = 2628.57 FH, margin = 2628.57 − 200 = 2428.57 FH.
    assert result.verdict == OK
    assert result.symbol == "✓"
    assert result.wear_now_mm == pytest.approx(0.28, rel=1e-9)
    assert result.remaining_usage == pytest.approx(0.92 / 0.00035, rel=1e-9)
    assert result.remaining_usage_conservative == pytest.approx(0.92 / 0.00035, rel=1e-9)
    assert result.margin == pytest.approx(2428.571, abs=0.001)
    assert "margin 2429 engine hours" in result.reason


def test_the_demo_plug_wears_by_continuous_ignition_hours():
    history = {"erosion_mm": DEMO_EROSION, "engine_hours": DEMO_FH, "starts": DEMO_STARTS,
               "continuous_ignition_hours": DEMO_CI_HOURS}
    # scipy reference: median absolute residual of each measure's own Theil–Sen line.
    misfit = {}
    for name in ("engine_hours", "starts", "continuous_ignition_hours"):
        ref = theilslopes(DEMO_EROSION, history[name], alpha=0.90)
        residual = np.array(DEMO_EROSION) - (ref.intercept + ref.slope * np.array(history[name]))
        misfit[name] = float(np.median(np.abs(residual)))
    assert min(misfit, key=misfit.__getitem__) == "continuous_ignition_hours"
    assert best_usage_measure(history) == "continuous_ignition_hours"


# --- verdict boundaries ---------------------------------------------------------------------

# Hand-made, exact in binary: 0, 0.25, 0.5 mm at 0, 64, 128 units -> every pairwise slope is
# 2^-8 mm/unit, intercept 0.25 − 64·2^-8 = 0, wear at 128 = 0.5 mm exactly.
EXACT = _points([0.0, 64.0, 128.0], [0.0, 0.25, 0.5])


def test_remaining_exactly_the_interval_is_ok_with_zero_margin():
    # Hand: (1.0 − 0.5) / 2^-8 = 128 units, equal to the interval.
    result = forecast(EXACT, 1.0, 128.0, 128.0)
    assert result.remaining_usage_conservative == 128.0
    assert result.verdict == OK
    assert result.margin == 0.0


def test_remaining_one_unit_short_of_the_interval_is_replace_now():
    # Hand: remaining 128 units (no band: every pairwise slope is equal) against an interval
    # of 129: the limit comes one unit before the next inspection, at either rate.
    result = forecast(EXACT, 1.0, 128.0, 129.0)
    assert result.verdict == REPLACE_NOW
    assert result.margin == -1.0


def test_wear_exactly_at_the_limit_is_replace_now():
    # Hand: wear now 0.5 mm with a 0.5 mm limit: (0.5 − 0.5)/2^-8 = 0 remaining.
    result = forecast(EXACT, 0.5, 128.0, 128.0)
    assert result.remaining_usage_conservative == 0.0
    assert result.verdict == REPLACE_NOW
    assert result.symbol == "✗"


def test_wear_beyond_the_limit_is_replace_now_with_negative_remaining():
    # Hand: (0.25 − 0.5)/2^-8 = −64 units: overdue.
    result = forecast(EXACT, 0.25, 128.0, 128.0)
    assert result.verdict == REPLACE_NOW
    assert result.remaining_usage_conservative == -64.0


def test_usage_since_the_last_inspection_adds_trend_wear():
    # Hand: at 192 units the trend gives 192·2^-8 = 0.75 mm; (1.0 − 0.75)/2^-8 = 64 units.
    result = forecast(EXACT, 1.0, 192.0, 64.0)
    assert result.wear_now_mm == 0.75
    assert result.remaining_usage_conservative == 64.0
    assert result.verdict == OK


def test_a_flat_history_has_no_end_in_sight():
    # Hand: 0.3 mm at every inspection -> slope 0, so no limit is ever reached by the trend.
    result = forecast(_points([100.0, 200.0, 300.0], [0.3, 0.3, 0.3]), 1.2, 300.0, 200.0)
    assert result.verdict == OK
    assert math.isinf(result.remaining_usage_conservative)
    assert "no measurable wear trend" in result.reason


# --- too few points: the fleet pooled rate, or not enough history ---------------------------

def test_too_few_gauged_points_are_marked_and_said():
    fit = wear_rate(_points([100.0, 300.0], [0.10, 0.20]))
    assert fit.too_few
    assert fit.slope_mm_per_unit is None
    assert fit.reason == "2 gauged inspections: too few for a trend."
    same_usage = wear_rate(_points([300.0, 300.0, 300.0], [0.20, 0.21, 0.19]))
    assert same_usage.too_few
    assert "2 or more different usages" in same_usage.reason


def test_too_few_points_fall_back_to_the_fleet_pooled_rate_and_say_so():
    points = _points([100.0, 300.0], [0.10, 0.20])
    result = forecast(points, 1.2, 400.0, 200.0, pooled_rate=0.0005, unit="engine hours")
    # Hand: from the latest gauged 0.20 mm at 300 FH, 100 FH at 0.0005 mm/FH adds 0.05 mm:
    # wear now 0.25 mm; remaining (1.20 − 0.25)/0.0005 = 1900 FH, margin 1900 − 200 = 1700.
    assert result.rate_source == FLEET_POOLED
    assert result.wear_now_mm == pytest.approx(0.25, rel=1e-12)
    assert result.remaining_usage == pytest.approx(1900.0, rel=1e-9)
    assert result.remaining_usage_conservative == pytest.approx(1900.0, rel=1e-9)
    assert result.margin == pytest.approx(1700.0, rel=1e-9)
    assert result.verdict == OK
    assert "Fleet pooled rate" in result.reason
    assert "2 gauged inspections: too few for a trend" in result.reason


def test_too_few_points_and_no_pooled_rate_is_not_enough_history():
    result = forecast(_points([100.0, 300.0], [0.10, 0.20]), 1.2, 300.0, 200.0)
    assert result.verdict == NOT_ENOUGH
    assert result.symbol == "?"
    assert result.remaining_usage is None and result.margin is None
    assert result.wear_now_mm == 0.20
    assert "3 gauged inspections" in result.reason and "fleet pooled rate" in result.reason


def test_no_inspections_at_all_is_not_enough_history():
    result = forecast([], 1.2, 0.0, 200.0)
    assert result.verdict == NOT_ENOUGH
    assert "gauge the erosion in mm" in result.reason


def test_own_history_is_preferred_over_the_pooled_rate():
    result = forecast(_points(ORDINARY_FH, ORDINARY_EROSION), 1.2, 800.0, 200.0,
                      pooled_rate=0.01)
    assert result.rate_source == OWN_HISTORY
    assert result.remaining_usage == pytest.approx(0.92 / 0.00035, rel=1e-9)  # as above, by hand


def test_pooled_rate_is_the_median_slope_of_the_fits_with_a_trend():
    def fit(slope, too_few=False):
        return WearFit(None if too_few else slope, 0.0, slope, slope, 4, too_few, "", False)

    # Hand: median of 0.0003, 0.0004, 0.0009 is 0.0004; the too-few fit is left out.
    assert pooled_rate([fit(0.0009), fit(0.0003), fit(0.5, too_few=True), fit(0.0004)]) == 0.0004
    assert pooled_rate([fit(0.5, too_few=True)]) is None
    assert pooled_rate([]) is None


# --- go/no-go gauges: censored data ---------------------------------------------------------

def test_a_failed_go_no_go_gauge_is_replace_now():
    points = [WearPoint(200.0, None, passed=True), WearPoint(400.0, None, passed=False)]
    result = forecast(points, 1.2, 400.0, 200.0, unit="engine hours")
    assert result.verdict == REPLACE_NOW
    assert result.rate_source == GO_NO_GO
    assert result.remaining_usage_conservative == 0.0
    assert "failed at 400 engine hours" in result.reason


def test_passed_go_no_go_results_alone_are_not_a_numeric_fit():
    points = [WearPoint(u, None, passed=True) for u in (200.0, 400.0, 600.0)]
    fit = wear_rate(points)
    assert fit.too_few and fit.points_used == 0 and fit.slope_mm_per_unit is None
    assert "go/no-go" in fit.reason
    assert forecast(points, 1.2, 600.0, 200.0, pooled_rate=0.0005).verdict == NOT_ENOUGH


def test_passed_results_are_not_fitted_among_gauged_ones():
    gauged = _points(ORDINARY_FH, ORDINARY_EROSION)
    mixed = gauged + [WearPoint(900.0, None, passed=True)]
    assert wear_rate(mixed).slope_mm_per_unit == wear_rate(gauged).slope_mm_per_unit
    assert wear_rate(mixed).points_used == 4
    assert "re-gauge" not in forecast(mixed, 1.2, 900.0, 200.0).reason  # 0.315 mm < 1.2 mm


def test_a_passed_result_the_trend_contradicts_asks_for_a_re_gauge():
    # Hand: the ordinary trend is 0.00035·1000 = 0.35 mm at 1000 FH, beyond a 0.30 mm limit,
    # yet the go/no-go gauge passed there.
    points = _points(ORDINARY_FH, ORDINARY_EROSION) + [WearPoint(1000.0, None, passed=True)]
    result = forecast(points, 0.30, 1000.0, 200.0)
    assert "re-gauge the plug in mm" in result.reason


def test_estimated_usage_is_flagged():
    points = _points(DEMO_CI_HOURS, DEMO_EROSION, estimated=True)
    assert wear_rate(points).estimated_usage
    assert "estimated" in forecast(points, DEMO_LIMIT, 145.0, 40.0).reason
    assert not wear_rate(_points(DEMO_CI_HOURS, DEMO_EROSION)).estimated_usage


# --- choosing the usage measure -------------------------------------------------------------

def test_best_measure_is_the_one_the_wear_follows():
    starts = [100.0, 300.0, 500.0, 700.0]
    history = {"erosion_mm": [0.1 + 0.001 * s for s in starts],   # hand-made: linear in starts
               "engine_hours": [100.0, 150.0, 600.0, 650.0],
               "starts": starts}
    assert best_usage_measure(history) == "starts"


def test_a_measure_with_gaps_does_not_compete():
    cih = [10.0, 30.0, None, 70.0]
    history = {"erosion_mm": [0.1, 0.3, 0.5, 0.7],
               "engine_hours": [100.0, 150.0, 600.0, 650.0],
               "continuous_ignition_hours": cih}   # hand: linear in cih where recorded
    assert best_usage_measure(history) == "engine_hours"


def test_a_tie_goes_to_engine_hours():
    # Hand: erosion is exactly linear in both measures: both misfits are 0.
    history = {"erosion_mm": [0.1, 0.2, 0.3], "engine_hours": [100.0, 200.0, 300.0],
               "starts": [50.0, 100.0, 150.0]}
    assert best_usage_measure(history) == "engine_hours"


@pytest.mark.parametrize(("history", "rule"), [
    ({"erosion_mm": [0.1, 0.2, 0.3], "flight_cycles": [1.0, 2.0, 3.0]}, "usage_measure_unknown"),
    ({"erosion_mm": [0.1, 0.2, 0.3], "starts": [1.0, 2.0]}, "history_invalid"),
    ({"starts": [1.0, 2.0, 3.0]}, "history_invalid"),
    ({"erosion_mm": [0.1, 0.2], "starts": [1.0, 2.0]}, "usage_history_too_short"),
    ({"erosion_mm": [0.1, -0.2, 0.3], "starts": [1.0, 2.0, 3.0]}, "erosion_invalid"),
    ({"erosion_mm": [0.1, 0.2, 0.3], "starts": [1.0, math.nan, 3.0]}, "usage_invalid"),
])
def test_best_measure_refuses_senseless_history(history, rule):
    with pytest.raises(RuleRefusal) as refused:
        best_usage_measure(history)
    assert refused.value.rule == rule


# --- senseless input ------------------------------------------------------------------------

@pytest.mark.parametrize(("usage", "erosion", "passed", "rule"), [
    (-1.0, 0.1, None, "usage_invalid"),
    (math.nan, 0.1, None, "usage_invalid"),
    (math.inf, 0.1, None, "usage_invalid"),
    (100.0, -0.01, None, "erosion_invalid"),
    (100.0, math.nan, None, "erosion_invalid"),
    (100.0, None, None, "reading_missing"),
])
def test_a_senseless_inspection_is_refused(usage, erosion, passed, rule):
    with pytest.raises(RuleRefusal) as refused:
        WearPoint(usage, erosion, passed)
    assert refused.value.rule == rule


@pytest.mark.parametrize(("kwargs", "rule"), [
    ({"limit_mm": 0.0}, "limit_invalid"),
    ({"limit_mm": -1.2}, "limit_invalid"),
    ({"limit_mm": math.nan}, "limit_invalid"),
    ({"usage_now": 500.0}, "usage_now_before_last_inspection"),
    ({"usage_now": -1.0}, "usage_invalid"),
    ({"usage_now": math.nan}, "usage_invalid"),
    ({"next_inspection_in": 0.0}, "next_inspection_invalid"),
    ({"next_inspection_in": math.nan}, "next_inspection_invalid"),
    ({"pooled_rate": math.nan}, "pooled_rate_invalid"),
])
def test_a_senseless_forecast_request_is_refused(kwargs, rule):
    request = {"points": _points(ORDINARY_FH, ORDINARY_EROSION), "limit_mm": 1.2,
               "usage_now": 800.0, "next_inspection_in": 200.0, **kwargs}
    with pytest.raises(RuleRefusal) as refused:
        forecast(**request)
    assert refused.value.rule == rule
