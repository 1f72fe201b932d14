"""What every bench shares: timing one call, and percentiles of the samples."""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any


def percentile(values: list[float], p: float) -> float:
    """The p-quantile (0..1) by linear interpolation between the nearest ranks."""
    ordered = sorted(values)
    rank = (len(ordered) - 1) * p
    low = int(rank)
    high = min(low + 1, len(ordered) - 1)
    return ordered[low] + (ordered[high] - ordered[low]) * (rank - low)


def timed(fn: Callable[[], Any]) -> float:
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start
