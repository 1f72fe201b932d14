"""A spark count as the station records it: by taps or over a timed window, with its rate,
resolution and verdict, and for both channels together the check against A and B."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from . import sparks
from .errors import RuleRefusal
from .exciter_rows import ChosenLimits, limits_for
from .procedures import EXCITER_MODES, SparkCount
from .readings import InputProblem
from .units import seconds


def check_mode(step: SparkCount, data: Mapping[str, Any]) -> str | None:
    """The mode a count says it was made in must be the step's: a combination unit's start
    and continuous modes each have their own limits, so a count in the other mode, or one
    that does not say, cannot be judged here. A step without a mode takes no mode."""
    said = data.get("mode")
    said = said.strip() if isinstance(said, str) else said
    if step.mode is None:
        if said not in (None, ""):
            raise InputProblem("mode", "This count is not made in a mode of a combination "
                               "unit: leave the mode out.")
        return None
    wanted = EXCITER_MODES[step.mode]
    if said in (None, ""):
        raise InputProblem("mode", f"Say the mode the unit was counted in: this step is "
                           f"for the {wanted} mode.")
    if said != step.mode:
        other = EXCITER_MODES.get(str(said), f"'{said}'")
        raise InputProblem("mode", f"This step counts the {wanted} mode, not the {other} "
                           "mode: select the step's mode and count again.")
    return step.mode


def evaluate_spark_count(step: SparkCount, data: Mapping[str, Any],
                         single_rates: Mapping[str, tuple[float, float]],
                         chosen: ChosenLimits | None = None) -> dict[str, Any]:
    """A spark count by taps or over a timed window: rate, resolution, verdict and, for both
    channels together, the check against A + B. `single_rates` are this job's latest A and B
    results in the step's mode (rate, resolution). A mistyped count or a wrong mode is an
    InputProblem; limits are `chosen` (the step's row for the fitted exciters), else the
    step's own (a table's narrowest row)."""
    mode = check_mode(step, data)
    chosen = chosen or limits_for(step.limits, ())
    method = data.get("method")
    try:
        if method == "taps":
            taps = data.get("taps")
            if not isinstance(taps, list):
                raise InputProblem("taps", "Tap once for each snap you hear.")
            tapped = sparks.spark_rate_from_taps(taps, one_unit=step.channel != "both")
            rate, resolution = tapped.rate_per_min, 0.0
            stored: dict[str, Any] = {
                "method": "taps", "taps": [float(t) for t in taps], "rate": rate,
                "median_interval_s": tapped.median_interval_s,
                "double_taps": list(tapped.double_taps),
                "missed": [list(m) for m in tapped.missed],
                "inferred_missed": tapped.inferred_missed, "rate_method": tapped.method,
                "counted_sparks": tapped.counted_sparks, "window_s": tapped.window_s}
        elif method == "timed":
            window = data.get("window_s")
            allowed = {seconds(str(step.window)), 30.0, 60.0}
            if not isinstance(window, (int, float)) or float(window) not in allowed:
                raise InputProblem("window_s", "Count over a 30 s or 60 s window.")
            count = data.get("count")
            if isinstance(count, str) and count.strip().isdigit():
                count = int(count.strip())
            if not isinstance(count, int) or isinstance(count, bool):
                raise InputProblem("count", "Enter the number of snaps you counted.")
            timed = sparks.spark_rate_from_count(count, float(window))
            rate, resolution = timed.rate_per_min, timed.resolution_per_min
            stored = {"method": "timed", "count": count, "window_s": float(window),
                      "rate": rate}
        else:
            raise InputProblem("method", "Tap the snaps, or count them over a timed window.")
    except RuleRefusal as refusal:  # a count that cannot be: fix the entry, nothing is kept
        field = "taps" if method == "taps" else "count"
        raise InputProblem(field, refusal.reason) from None
    low, high = chosen.limits.min, chosen.limits.max
    judged = sparks.rate_verdict(rate, low if low is not None else 0.0,
                                 high if high is not None else math.inf, resolution)
    stored.update(resolution=resolution, channel=step.channel, verdict=judged.verdict,
                  margin=judged.margin, mode=mode, **chosen.as_data())
    if step.channel == "both":
        if "A" not in single_rates or "B" not in single_rates:
            in_mode = f" in the {EXCITER_MODES[mode]} mode" if mode else ""
            raise RuleRefusal("single_counts_missing", "Count channel A and channel B on their "
                              f"own{in_mode} first: the combined count is checked against "
                              "them.")
        (rate_a, res_a), (rate_b, res_b) = single_rates["A"], single_rates["B"]
        check = sparks.two_channel_check(rate_a, rate_b, rate, step.both_tolerance or 0.0,
                                         max(resolution, res_a, res_b))
        stored["both_check"] = {"result": check.result, "expected": check.expected,
                                "deviation": check.deviation, "message": check.message,
                                "silent_channel": check.silent_channel,
                                "beat_period_s": check.beat_period_s}
        if check.result in ("inconsistent", "one unit not firing"):
            stored["verdict"] = "out of limits"
        # Otherwise the combined rate keeps its own verdict against the step's limits: a
        # combined count below the step's minimum is out of limits, whatever A and B were.
    return stored
