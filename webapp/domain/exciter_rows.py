"""Which row of a step's data applies to the exciters fitted where the job works: limits
and capacitor data may be tables keyed by the exciter's part number, with a default row.

The decision rule is conservative: the row of the fitted part number, else the default;
when a count covers two exciters whose rows differ, the narrowest limits of the rows (the
highest minimum and the lowest maximum); when the fitted part number is not known, the
narrowest of all rows. A discharge wait takes the row with the longest bleed-down (see
`gates.discharge_requirement`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from .procedures import Capacitor, CapacitorTable, Limits, LimitsTable

if TYPE_CHECKING:  # the engine's fold imports the gates, which use this module
    from .engine import EngineState

NOT_A_TABLE = "procedure"      # the step gives one row for every part number
UNKNOWN = "narrowest of all rows (fitted part number not known)"


@dataclass(frozen=True)
class FittedExciter:
    channel: str
    part_number: str | None
    type: str | None


@dataclass(frozen=True)
class ChosenLimits:
    """The limits a reading is judged against, and the row they came from: "default", a
    part number, "procedure" (no table), or how the narrowest of several rows was made."""

    limits: Limits
    source: str

    def as_data(self) -> dict[str, Any]:
        return {"limits": {"min": self.limits.min, "max": self.limits.max},
                "limits_from": self.source}


def fitted_exciters(engine: EngineState | None, components: Sequence[Mapping[str, Any]],
                    channels: Sequence[str]) -> list[FittedExciter]:
    """The exciter fitted on each channel: from the engine's state when it is known, else
    from the parts recorded when the job opened."""
    found = []
    for channel in channels:
        fitted = engine.fitted("exciter", channel) if engine is not None else None
        if fitted is not None:
            found.append(FittedExciter(channel, fitted.part_number, fitted.type))
            continue
        recorded = next((c for c in components if c.get("kind") == "exciter"
                         and c.get("channel") == channel), None)
        found.append(FittedExciter(channel, recorded.get("part_number") if recorded else None,
                                   recorded.get("type") if recorded else None))
    return found


def narrowest(rows: Sequence[Limits]) -> Limits:
    lows = [r.min for r in rows if r.min is not None]
    highs = [r.max for r in rows if r.max is not None]
    # Built without the model's check: rows that do not overlap leave nothing within,
    # which the verdict then says (a rate cannot be above the min and below the max).
    return Limits.model_construct(min=max(lows) if lows else None,
                                  max=min(highs) if highs else None)


def limits_for(limits: Limits | LimitsTable, part_numbers: Sequence[str | None]) -> ChosenLimits:
    """The row of a step's limits for the fitted exciters' part numbers (see the module's
    decision rule)."""
    if isinstance(limits, Limits):
        return ChosenLimits(limits, NOT_A_TABLE)
    if not part_numbers or any(p is None for p in part_numbers):
        return ChosenLimits(narrowest([limits.default, *limits.by_part_number.values()]),
                            UNKNOWN)
    keys = sorted({p if p in limits.by_part_number else "default" for p in part_numbers
                   if p is not None})
    rows = [limits.by_part_number.get(k, limits.default) for k in keys]
    if len(keys) == 1:
        return ChosenLimits(rows[0], keys[0])
    return ChosenLimits(narrowest(rows), "narrowest of " + " and ".join(keys))


def capacitor_rows(capacitor: Capacitor | CapacitorTable | None,
                   part_numbers: Sequence[str | None]) -> list[tuple[Capacitor, str]]:
    """The capacitor rows a discharge wait must cover, with where each came from: the row of
    each fitted part number (or the default), or every row when one is not known."""
    if capacitor is None:
        return []
    if isinstance(capacitor, Capacitor):
        return [(capacitor, NOT_A_TABLE)]
    if not part_numbers or any(p is None for p in part_numbers):
        return [(capacitor.default, "default"), *((row, p) for p, row
                                                  in capacitor.by_part_number.items())]
    keys = sorted({p if p in capacitor.by_part_number else "default" for p in part_numbers
                   if p is not None})
    return [(capacitor.by_part_number.get(k, capacitor.default), k) for k in keys]
