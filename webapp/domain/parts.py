"""Parts taken off and put on an engine: the typed fields a part step records and the rules
a parts and records clerk would hold them to.

A removed part must be the one the engine has fitted there (a different serial or part
number is kept, flagged as a mismatch that needs a finding, never silently accepted); a
fitted part must be of a part number the position may take, not fitted anywhere else in
the fleet, and come with its release certificate and condition.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from .engine import PART_LABELS, EngineState
from .errors import RuleRefusal
from .procedures import PartChange
from .readings import InputProblem

REMOVAL_STATUSES = {"unserviceable": "unserviceable", "serviceable": "removed serviceable"}
REMOVAL_REASONS = ("scheduled", "failed", "robbed")
CONDITIONS = ("new", "overhauled", "serviceable used")
MAX_TEXT = 60
MISMATCH = "mismatch"


@dataclass(frozen=True)
class AllowedPart:
    """A part number a position of an engine may take (channel None: either channel)."""

    kind: str
    channel: str | None
    part_number: str
    type: str
    interchangeability: str   # approved | alternate

    def fits(self, kind: str, channel: str) -> bool:
        return self.kind == kind and self.channel in (None, channel)


@dataclass(frozen=True)
class Whereabouts:
    """Where a serial is fitted now, and how it last came off an engine (if it did)."""

    fitted_at: str | None = None          # "DEMO-101 engine 1, channel A exciter"
    last_removal_status: str | None = None
    last_removal_job: int | None = None
    # An exciter's duty-cycle clock as the engine it came off last knew it (kept form): it
    # goes on with the unit, so a hot exciter moved to another engine still cools first.
    clock: Mapping[str, Any] | None = None


def _text(data: Mapping[str, Any], name: str, said: str) -> str:
    value = data.get(name)
    if not isinstance(value, str) or not value.strip():
        raise InputProblem(name, f"Enter the {said}.")
    value = value.strip()
    if len(value) > MAX_TEXT or any(ord(c) < 32 for c in value):
        raise InputProblem(name, f"The {said} is at most {MAX_TEXT} characters on one line; "
                           "check what was typed.")
    return value


def _choice(data: Mapping[str, Any], name: str, choices: Sequence[str], said: str) -> str:
    value = data.get(name)
    if value not in choices:
        raise InputProblem(name, f"Choose the {said}: " + ", ".join(choices) + ".")
    return str(value)


def _figure(raw: Mapping[str, Any], name: str, whole: bool, required: bool) -> float | None:
    value = raw.get(name)
    if value in (None, "") and not required:
        return None
    try:
        number = float(str(value).strip().replace(",", "."))
    except ValueError:
        number = math.nan
    said = name.replace("_", " ")
    if not math.isfinite(number) or number < 0 or number > 200_000:
        raise InputProblem(name, f"Enter the engine's {said} (a number from its log).")
    if whole and number != int(number):
        raise InputProblem(name, f"{said.capitalize()} are counted in whole numbers.")
    return int(number) if whole else number


def engine_usage(data: Mapping[str, Any]) -> dict[str, Any]:
    """The engine's usage when the part came off or went on: hours and starts from its log,
    continuous-ignition hours where known (the part's history is reckoned from these)."""
    raw = data.get("usage")
    if not isinstance(raw, Mapping):
        raise InputProblem("engine_hours", "Enter the engine's hours and starts from its log.")
    usage: dict[str, Any] = {
        "engine_hours": _figure(raw, "engine_hours", False, True),
        "starts": _figure(raw, "starts", True, True)}
    ci = _figure(raw, "continuous_ignition_hours", False, False)
    if ci is not None:
        usage["continuous_ignition_hours"] = ci
    return usage


def time_fitted(fitted: Mapping[str, Any] | None,
                removed: Mapping[str, Any] | None) -> dict[str, float] | None:
    """How long a part was fitted, by the engine's own counters at each end (None when either
    end is unknown, e.g. fitted before the station's first job, or still fitted)."""
    if not fitted or not removed:
        return None
    spans = {}
    for name in ("engine_hours", "starts", "continuous_ignition_hours"):
        if fitted.get(name) is not None and removed.get(name) is not None:
            spans[name] = removed[name] - fitted[name]
    return spans or None


def evaluate_part(step: PartChange, data: Mapping[str, Any], channel: str,
                  engine: EngineState, allowed: Sequence[AllowedPart],
                  whereabouts: Whereabouts) -> dict[str, Any]:
    """Check a part step's fields against the engine; return the data to store, with the
    effect on the engine (`engine`). Raises InputProblem for a field, RuleRefusal for a rule."""
    label = f"channel {channel} {PART_LABELS[step.part]}"
    part_number = _text(data, "part_number", "part number from the data plate")
    serial = _text(data, "serial", "serial number from the data plate")
    usage = engine_usage(data)
    position = engine.position(step.part, channel)
    if step.action == "remove":
        status = _choice(data, "status", tuple(REMOVAL_STATUSES), "status of the removed part")
        reason = _choice(data, "reason", REMOVAL_REASONS, "reason for removal")
        tag = _text(data, "tag", "number of the tag attached to the removed part")
        if position.fitted is None:
            emptied = position.emptied
            raise RuleRefusal("position_empty", f"Nothing is recorded as fitted as the {label}"
                              + (f": {emptied.serial} was removed in job {emptied.job_id}."
                                 if emptied else ".") + " Check the engine before going on.")
        stored: dict[str, Any] = {"action": "remove", "part": step.part, "channel": channel,
                  "part_number": part_number, "serial": serial, "status": status,
                  "reason": reason, "tag": tag, "usage": usage}
        expected = position.fitted
        if (expected.part_number, expected.serial) != (part_number, serial):
            # The plate is the truth of what came off; the fleet record said otherwise.
            stored.update(verdict=MISMATCH, expected={"part_number": expected.part_number,
                                                      "serial": expected.serial})
        else:
            stored["verdict"] = "matches"
        stored["engine"] = [{"effect": "remove", "kind": step.part, "channel": channel,
                             **{k: stored[k] for k in ("part_number", "serial", "status",
                                                       "reason", "tag", "usage")}}]
        return stored
    release = _text(data, "release", "release certificate reference")
    condition = _choice(data, "condition", CONDITIONS, "condition of the incoming part")
    if position.fitted is not None:
        raise RuleRefusal("position_fitted", f"{position.fitted.part_number} S/N "
                          f"{position.fitted.serial} is still recorded as the {label}: record "
                          "its removal first.")
    fits = [a for a in allowed if a.fits(step.part, channel)]
    match = next((a for a in fits if a.part_number == part_number), None)
    if match is None:
        listed = ", ".join(f"{a.part_number}" + (" (alternate)" if a.interchangeability ==
                                                 "alternate" else "") for a in fits)
        raise RuleRefusal("part_number_not_allowed", f"{part_number} is not a part number the "
                          f"{label} may take" + (f"; the fleet configuration allows {listed}."
                                                 if listed else "; the fleet configuration "
                                                 "lists none: ask technical services."))
    if whereabouts.fitted_at is not None:
        raise RuleRefusal("serial_fitted_elsewhere", f"S/N {serial} is recorded as fitted on "
                          f"{whereabouts.fitted_at}. One part cannot be in two places: check "
                          "the data plate.")
    if whereabouts.last_removal_status == "unserviceable" and condition == "serviceable used":
        raise RuleRefusal("part_unserviceable", f"S/N {serial} came off as unserviceable in "
                          f"job {whereabouts.last_removal_job}: it goes back on only after "
                          "repair or overhaul, with that release certificate.")
    stored = {"action": "install", "part": step.part, "channel": channel,
              "part_number": part_number, "serial": serial, "type": match.type,
              "interchangeability": match.interchangeability, "release": release,
              "condition": condition, "usage": usage, "verdict": "matches"}
    stored["engine"] = [{"effect": "install", "kind": step.part, "channel": channel,
                         **{k: stored[k] for k in ("part_number", "serial", "type", "release",
                                                   "condition", "usage")}}]
    if step.part == "exciter" and whereabouts.clock is not None:
        stored["engine"][0]["clock"] = dict(whereabouts.clock)
    return stored
