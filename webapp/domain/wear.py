"""Igniter plug wear: each plug's erosion trend and its remaining life to the limit.

Plugs wear by spark count, not flight hours: a winter of continuous ignition or
short sectors wears them several times faster, so a fixed interval finds a
fast-wearing plug late. The trend is fitted robustly (Theil–Sen: the median of
the pairwise slopes, so one misread gauge cannot drag it), the forecast uses the
fast end of its 90 % confidence band, and go/no-go results are kept as what
they are — censored data ("below the limit" or "at or beyond it"), never
numbers. Advisory only: the approved data's limit and the gauge decide.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from statistics import median
from typing import TypeGuard

import numpy as np
from scipy.stats import theilslopes

from .errors import RuleRefusal

CONFIDENCE = 0.90      # Theil–Sen confidence band used for the conservative bound
MIN_GAUGED = 3         # gauged inspections needed for a trend of this plug's own
MEASURES = ("engine_hours", "starts", "continuous_ignition_hours")

OK = "OK to next inspection"
BRING_FORWARD = "bring inspection forward"
REPLACE_NOW = "replace now"
NOT_ENOUGH = "not enough history"
SYMBOLS = {OK: "✓", BRING_FORWARD: "▲", REPLACE_NOW: "✗", NOT_ENOUGH: "?"}

OWN_HISTORY = "this plug's history"
FLEET_POOLED = "fleet pooled rate"
GO_NO_GO = "go/no-go gauge"
NO_RATE = "none"


def _is_number(value: object) -> TypeGuard[float]:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _at_least_zero(rule: str, what: str, value: object) -> float:
    if _is_number(value) and math.isfinite(value) and value >= 0:
        return float(value)
    raise RuleRefusal(rule, f"{what} must be a number of at least 0, not {value!r}.",
                      value=repr(value))


def _above_zero(rule: str, what: str, value: object) -> float:
    if _is_number(value) and math.isfinite(value) and value > 0:
        return float(value)
    raise RuleRefusal(rule, f"{what} must be a number above 0, not {value!r}.",
                      value=repr(value))


@dataclass(frozen=True)
class WearPoint:
    """One plug inspection.

    `usage` is in the measure chosen for the plug (engine hours, starts or
    continuous-ignition hours) since it was fitted. `erosion_mm` is the gauged
    erosion; for a go/no-go gauge it is None and `passed` says True ("below the
    gauge's limit") or False ("at or beyond it"). `estimated` marks a usage taken
    from operator policy rather than counted (common for continuous ignition).
    """

    usage: float
    erosion_mm: float | None
    passed: bool | None = None
    estimated: bool = False

    def __post_init__(self) -> None:
        _at_least_zero("usage_invalid", "The usage at an inspection", self.usage)
        if self.erosion_mm is None:
            if self.passed is None:
                raise RuleRefusal("reading_missing", "An inspection needs the erosion in mm or "
                                  "a go/no-go result (passed or failed).", usage=self.usage)
        else:
            _at_least_zero("erosion_invalid", "Plug erosion in mm", self.erosion_mm)


@dataclass(frozen=True)
class WearFit:
    """A plug's erosion trend (mm per unit of usage), or why there is none.

    The slopes and intercept are None when `too_few` is True.
    """

    slope_mm_per_unit: float | None
    intercept_mm: float | None
    low_slope: float | None
    high_slope: float | None
    points_used: int
    too_few: bool
    reason: str
    estimated_usage: bool

    def wear_at(self, usage: float) -> float | None:
        """The trend's erosion at `usage`, or None without a trend."""
        if self.slope_mm_per_unit is None or self.intercept_mm is None:
            return None
        return self.intercept_mm + self.slope_mm_per_unit * usage


@dataclass(frozen=True)
class WearForecast:
    """The verdict for a plug at this visit, with the numbers behind it.

    Usages are in the plug's usage measure. `remaining_usage` is at the central
    rate, `remaining_usage_conservative` at the fast end of the band (the fleet
    pooled rate has no band: both are the same then); `margin` is the
    conservative remaining life minus the usage to the next inspection. Without
    any measurable wear trend the remaining life is math.inf. All numbers are
    None when there is not enough history.
    """

    verdict: str
    symbol: str
    wear_now_mm: float | None
    remaining_usage: float | None
    remaining_usage_conservative: float | None
    margin: float | None
    rate_source: str
    reason: str


def _gauged(points: Sequence[WearPoint]) -> list[WearPoint]:
    return sorted((p for p in points if p.erosion_mm is not None), key=lambda p: p.usage)


def _sentence_start(text: str) -> str:
    return text[:1].upper() + text[1:]


def _plural(n: int, word: str) -> str:
    return f"{'no' if n == 0 else n} {word}{'' if n == 1 else 's'}"


def wear_rate(points: Sequence[WearPoint]) -> WearFit:
    """Theil–Sen trend of erosion against usage over the gauged inspections.

    Needs at least 3 gauged inspections at 2 or more different usages; go/no-go
    results are not fitted (they only bound the wear). The low and high slopes
    are scipy.stats.theilslopes' 90 % confidence bounds.
    """
    gauged = _gauged(points)
    estimated = any(p.estimated for p in points)
    n = len(gauged)
    distinct = len({p.usage for p in gauged})
    if n < MIN_GAUGED or distinct < 2:
        if n < MIN_GAUGED:
            reason = f"{_plural(n, 'gauged inspection')}: too few for a trend"
            if n == 0 and points:
                reason += " (go/no-go results bound the wear but give no rate)"
        else:
            reason = (f"{n} gauged inspections all at usage {gauged[0].usage:g}: a trend needs "
                      f"them at 2 or more different usages")
        return WearFit(None, None, None, None, points_used=n, too_few=True, reason=reason + ".",
                       estimated_usage=estimated)
    usage = np.array([p.usage for p in gauged], dtype=float)
    erosion = np.array([p.erosion_mm for p in gauged], dtype=float)
    result = theilslopes(erosion, usage, alpha=CONFIDENCE)
    slope, intercept = float(result.slope), float(result.intercept)
    low, high = float(result.low_slope), float(result.high_slope)
    # The band's order statistics can fall outside the slopes for tiny samples; never let
    # the "fast" bound be slower than the trend itself.
    low = min(low, slope) if math.isfinite(low) else slope
    high = max(high, slope) if math.isfinite(high) else slope
    reason = (f"Theil–Sen trend over {n} gauged inspections: {slope:.5f} mm per unit of usage "
              f"(90 % band {low:.5f} to {high:.5f}).")
    return WearFit(slope, intercept, low, high, points_used=n, too_few=False, reason=reason,
                   estimated_usage=estimated)


def pooled_rate(fits: Sequence[WearFit]) -> float | None:
    """The fleet's pooled wear rate: the median slope of the fits that have a trend."""
    slopes = [f.slope_mm_per_unit for f in fits
              if not f.too_few and f.slope_mm_per_unit is not None]
    return float(median(slopes)) if slopes else None


def _remaining(limit_mm: float, wear_mm: float, rate: float) -> float:
    if rate > 0:
        return (limit_mm - wear_mm) / rate  # negative when already beyond the limit
    return 0.0 if wear_mm >= limit_mm else math.inf


def _not_enough(wear_now: float | None, reason: str) -> WearForecast:
    return WearForecast(NOT_ENOUGH, SYMBOLS[NOT_ENOUGH], wear_now, None, None, None, NO_RATE,
                        reason)


def forecast(points: Sequence[WearPoint], limit_mm: float, usage_now: float,
             next_inspection_in: float, pooled_rate: float | None = None, *,
             unit: str = "units") -> WearForecast:
    """Verdict for a plug now: OK to next inspection, bring it forward, or replace now.

    remaining = (limit − wear_now) / rate, conservative at the trend's high slope.
    wear_now is the trend's value at `usage_now`, never below the largest gauged
    reading. "replace now" if the conservative remaining ≤ 0, if even the central
    remaining falls short of `next_inspection_in` (the plug is out now: change it at
    this visit), or if a go/no-go gauge failed; "bring inspection forward" if only the
    conservative remaining falls short; otherwise "OK to next inspection". Without a
    trend of its own the plug falls back to the fleet's `pooled_rate`, started from its
    latest gauged reading.
    """
    limit_mm = _above_zero("limit_invalid", "The erosion limit", limit_mm)
    usage_now = _at_least_zero("usage_invalid", "The usage now", usage_now)
    next_inspection_in = _above_zero("next_inspection_invalid", "The usage to the next "
                                     "inspection", next_inspection_in)
    if pooled_rate is not None and (not _is_number(pooled_rate) or not math.isfinite(pooled_rate)):
        raise RuleRefusal("pooled_rate_invalid", f"The fleet pooled rate must be a number of mm "
                          f"per unit of usage, not {pooled_rate!r}.", value=repr(pooled_rate))
    last_usage = max((p.usage for p in points), default=None)
    if last_usage is not None and usage_now < last_usage:
        raise RuleRefusal("usage_now_before_last_inspection",
                          f"The usage now ({usage_now:g} {unit}) is before the last inspection "
                          f"({last_usage:g} {unit}): check both figures.",
                          usage_now=usage_now, last_inspection=last_usage)

    gauged = _gauged(points)
    measured_max = max((float(p.erosion_mm) for p in gauged if p.erosion_mm is not None),
                       default=None)
    fit = wear_rate(points)
    caution = (" Some usage is estimated (e.g. continuous-ignition hours from operator policy):"
               " check it before relying on the forecast." if fit.estimated_usage else "")

    failed = sorted((p for p in points if p.passed is False), key=lambda p: p.usage)
    if failed:
        wear_now = max(limit_mm, measured_max or 0.0)
        return WearForecast(REPLACE_NOW, SYMBOLS[REPLACE_NOW], wear_now, 0.0, 0.0,
                            -next_inspection_in, GO_NO_GO,
                            f"The go/no-go gauge failed at {failed[0].usage:g} {unit}: the erosion "
                            f"limit was reached at or before then. Replace the plug." + caution)

    if not gauged:
        need = ("gauge the erosion in mm at this visit to start the fleet pooled rate from"
                if pooled_rate is not None else
                f"gauge the erosion in mm at {MIN_GAUGED} inspections at different usages, or "
                f"give the fleet pooled rate with at least one gauged reading")
        return _not_enough(None, f"{_sentence_start(fit.reason[:-1])}: {need}.")
    if fit.too_few and pooled_rate is None:
        return _not_enough(measured_max,
                           f"{_sentence_start(fit.reason[:-1])}, and no fleet pooled rate: needs "
                           f"{MIN_GAUGED} gauged inspections at 2 or more different usages, "
                           f"or the fleet pooled rate.")

    # The trend as wear = base + rate · (usage − origin): this plug's own Theil–Sen line, or
    # the pooled rate started from this plug's latest gauged reading.
    if fit.slope_mm_per_unit is not None and fit.intercept_mm is not None:
        central = fit.slope_mm_per_unit
        fast = fit.high_slope if fit.high_slope is not None else central
        base, origin, source = fit.intercept_mm, 0.0, OWN_HISTORY
        opening = f"This plug's history: {fit.reason}"
    else:
        assert pooled_rate is not None  # no trend and no pooled rate returned above
        central = fast = pooled_rate
        base, origin, source = float(gauged[-1].erosion_mm or 0.0), gauged[-1].usage, FLEET_POOLED
        opening = (f"Fleet pooled rate {pooled_rate:.5f} mm/{unit}, from this plug's latest "
                   f"gauged reading ({fit.reason[:-1]}; the pooled rate has no band of its own).")

    def trend_at(usage: float) -> float:
        return base + central * (usage - origin)

    wear_now = max(trend_at(usage_now), measured_max or 0.0)
    remaining = _remaining(limit_mm, wear_now, central)
    conservative = _remaining(limit_mm, wear_now, fast)
    margin = conservative - next_inspection_in
    if conservative <= 0:
        verdict, ending = REPLACE_NOW, "at or beyond the limit: replace the plug now."
    elif remaining < next_inspection_in:
        verdict, ending = REPLACE_NOW, (f"even at the central rate the limit comes "
                                        f"{next_inspection_in - remaining:.0f} {unit} before the "
                                        f"next inspection: replace the plug at this visit.")
    elif conservative < next_inspection_in:
        verdict, ending = BRING_FORWARD, (f"at the fast rate the limit may come {-margin:.0f} "
                                          f"{unit} before the next inspection: bring the "
                                          f"inspection forward.")
    else:
        verdict, ending = OK, ("the gauge at the next inspection decides." if math.isinf(margin)
                               else f"margin {margin:.0f} {unit}.")
    if math.isinf(conservative):
        life = "no measurable wear trend"
    else:
        central_text = "no end in sight" if math.isinf(remaining) else f"{remaining:.0f} {unit}"
        life = f"{conservative:.0f} {unit} left at the fast rate, {central_text} at the central"
    reason = (f"{opening} Wear now {wear_now:.2f} mm of the {limit_mm:.2f} mm limit; {life}; "
              f"next inspection in {next_inspection_in:g} {unit}: {ending}")

    for p in points:
        if p.passed is True and trend_at(p.usage) >= limit_mm:
            reason += (f" The go/no-go gauge passed at {p.usage:g} {unit}, where the trend puts "
                       f"the wear at {trend_at(p.usage):.2f} mm, at or beyond the limit: re-gauge "
                       f"the plug in mm.")
            break
    return WearForecast(verdict, SYMBOLS[verdict], wear_now, remaining, conservative, margin,
                        source, reason + caution)


def best_usage_measure(history: Mapping[str, Sequence[float | None]]) -> str:
    """The usage measure that explains a plug's wear best, by name.

    `history` holds one list per key, one entry per inspection: "erosion_mm"
    (None for a go/no-go result, which is skipped) and any of "engine_hours",
    "starts", "continuous_ignition_hours" (None where not recorded). Only
    measures recorded at every gauged inspection, with a trend (3 or more gauged
    inspections at 2 or more usages), compete. Each gets a Theil–Sen fit; the
    score is the median absolute residual divided by the range of the gauged
    erosions, and the smallest wins. A tie goes to the earlier measure in the
    order above (engine hours first: the inspection interval is set in them).
    """
    unknown = sorted(set(history) - {"erosion_mm", *MEASURES})
    if unknown:
        raise RuleRefusal("usage_measure_unknown", f"Unknown usage measure(s) {unknown}: use "
                          f"{', '.join(MEASURES)}.", unknown=unknown)
    if "erosion_mm" not in history:
        raise RuleRefusal("history_invalid", "The history needs the gauged erosions "
                          "('erosion_mm'), one per inspection.")
    erosions = list(history["erosion_mm"])
    for name, values in history.items():
        if len(values) != len(erosions):
            raise RuleRefusal("history_invalid", f"'{name}' has {len(values)} entries for "
                              f"{len(erosions)} inspections: one entry per inspection.")
    rows = [i for i, e in enumerate(erosions) if e is not None]
    wear = np.array([_at_least_zero("erosion_invalid", "Plug erosion in mm", erosions[i])
                     for i in rows], dtype=float)
    spread = float(wear.max() - wear.min()) if rows else 0.0

    scores: dict[str, float] = {}
    for name in MEASURES:
        if name not in history:
            continue
        recorded = [history[name][i] for i in rows]
        if any(u is None for u in recorded):
            continue
        usage = np.array([_at_least_zero("usage_invalid", f"Usage '{name}'", u) for u in recorded],
                         dtype=float)
        if len(rows) < MIN_GAUGED or len(set(usage.tolist())) < 2:
            continue
        fit = theilslopes(wear, usage, alpha=CONFIDENCE)
        misfit = float(np.median(np.abs(wear - (fit.intercept + fit.slope * usage))))
        scores[name] = misfit / spread if spread > 0 else misfit
    if not scores:
        raise RuleRefusal("usage_history_too_short",
                          f"No usage measure is recorded at {MIN_GAUGED} or more gauged "
                          f"inspections at different usages: nothing to compare.")
    return min(scores, key=lambda name: (scores[name], MEASURES.index(name)))
