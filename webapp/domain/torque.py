"""Torque readings: the wrench setting as the mechanic's wrench showed it, the torque it
means at the fastener (lubricant factor, adapter at its angle), the verdict, and a step's
fasteners each torqued and judged on its own. The wrench comes from the station's register
(see `instruments`).

The wrench measures the moment about its own drive: F·L, with F the hand's force square to
the handle and L the handle's length. An adapter (crowfoot or extension) moves the fastener
a distance E from the drive, at an angle θ to the wrench's line. The moment about the
fastener is then F·(L + E·cos θ) (statics: the moment arm is the distance along the wrench,
F being square to it), so

    torque at the fastener = setting × (L + E·cos θ) / L
    setting for a required torque = required × L / (L + E·cos θ)

In line (θ = 0) this is the familiar L/(L + E); square to the wrench (θ = 90°) the adapter
changes nothing. The page shows the same setting from the same formula (`wrench_setting`);
the station judges what the reading means at the fastener (`applied_torque`).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from typing import Any

from .errors import RuleRefusal
from .procedures import Torque
from .readings import InputProblem, measure, read_number, verdict

NEEDS_FINDING = ("out of limits",)


def _arm(wrench_length: float, extension: float, angle_deg: float) -> float:
    """L + E·cos θ, the moment arm about the fastener, after checking the three."""
    if wrench_length <= 0:
        raise InputProblem("wrench_length", "The wrench length must be above zero.")
    if extension < 0:
        raise InputProblem("extension", "The adapter's extension is zero or more.")
    if not 0 <= angle_deg <= 180:
        raise InputProblem("angle", "The adapter's angle to the wrench is from 0° (in line) "
                           "to 180° (pointing back along the handle).")
    arm = wrench_length + extension * math.cos(math.radians(angle_deg))
    if arm <= 0.25 * wrench_length:
        # Pointing back past three quarters of the handle: the setting would be four times
        # the torque or more, where a wrench's own tolerance no longer means anything.
        raise InputProblem("angle", "At this angle and extension the adapter reaches back "
                           "over the handle: use a shorter adapter or another angle.")
    return arm


def wrench_setting(required: float, wrench_length: float, extension: float,
                   angle_deg: float = 0.0, lubricant_factor: float = 1.0) -> float:
    """What to set the wrench to for `required` at the fastener:
    required × factor × L / (L + E·cos θ)."""
    return (required * lubricant_factor * wrench_length
            / _arm(wrench_length, extension, angle_deg))


def adapter_setting(required: float, wrench_length: float, extension: float) -> float:
    """The in-line case: T_set = T_req·L/(L+E)."""
    return wrench_setting(required, wrench_length, extension)


def applied_torque(setting: float, lubricant_factor: float = 1.0,
                   adapter: tuple[float, float, float] | None = None) -> float:
    """The torque the data means, from the wrench's setting: the inverse of `wrench_setting`
    (adapter given as wrench length, extension and angle in degrees)."""
    if adapter is not None:
        length, extension, angle = adapter
        setting = setting * _arm(length, extension, angle) / length
    return setting / lubricant_factor


def accepted_fasteners(step: Torque, readings: Iterable[Mapping[str, Any]]) -> set[str]:
    """The step's fasteners whose latest reading stands: within its limits, or out of them
    with a deferred finding. Replaced, repaired or re-tested wait for a new reading."""
    latest: dict[str, Mapping[str, Any]] = {}
    for r in readings:
        if r["step"] == step.id and r.get("fastener") in step.fasteners:
            latest[r["fastener"]] = r
    return {name for name, r in latest.items()
            if r.get("verdict") not in NEEDS_FINDING
            or (r.get("finding") or {}).get("disposition") == "deferred"}


def _fastener(step: Torque, data: Mapping[str, Any], done: set[str]) -> str | None:
    chosen = data.get("fastener")
    if not step.fasteners:
        if chosen not in (None, ""):
            raise InputProblem("fastener", "This step torques one fastener: leave the "
                               "fastener out.")
        return None
    to_do = [name for name in step.fasteners if name not in done]
    if not isinstance(chosen, str) or chosen not in step.fasteners:
        raise InputProblem("fastener", "Choose the fastener this reading is for: "
                           + "; ".join(to_do) + ".")
    if chosen in done:
        raise RuleRefusal("fastener_done", f"{chosen} is already torqued within its limits "
                          "(or deferred): torque the next one, " + "; ".join(to_do) + ".",
                          to_do=to_do)
    return chosen


def _adapter(step: Torque, raw: Any) -> tuple[float, float, float]:
    if not step.adapter:
        raise InputProblem("adapter", "This step's data gives no adapter.")
    if not isinstance(raw, Mapping):
        raise InputProblem("adapter", "Give the wrench length, the adapter's extension and "
                           "its angle to the wrench.")
    length = read_number("wrench_length", raw.get("wrench_length"))
    extension = read_number("extension", raw.get("extension"))
    angle = read_number("angle", raw.get("angle"))
    if step.adapter_in_line and angle != 0:
        raise RuleRefusal("adapter_not_in_line", f"This step's data needs the adapter in line "
                          f"with the wrench (0°); {angle:g}° was recorded. Fit it in line and "
                          "torque again.", angle=angle)
    _arm(length, extension, angle)
    return length, extension, angle


def evaluate_torque(step: Torque, data: Mapping[str, Any],
                    done: set[str] | None = None) -> dict[str, Any]:
    """A torque reading as the station keeps it: the setting as entered, the torque it means
    at the fastener, and the verdict. `done` are the step's fasteners already accepted (see
    `accepted_fasteners`). The wrench is checked against the station's register by
    `instruments.check_use`: its setting (the value as entered) must be in its range."""
    fastener = _fastener(step, data, done or set())
    measured = measure("value", data.get("value"), data.get("unit"), step.unit, "torque")
    stored: dict[str, Any] = measured.as_data()
    if fastener is not None:
        stored["fastener"] = fastener
    factor = step.lubricant_factor or 1.0
    if step.lubricant_factor is not None:
        stored["lubricant_factor"] = step.lubricant_factor
    adapter = None
    if data.get("adapter") is not None:
        adapter = _adapter(step, data["adapter"])
    # The data's torque is for its stated condition; where it gives a lubricant factor the
    # wrench is set to required × factor, so the limits judge the setting ÷ factor; through
    # an adapter the wrench reads low by L/(L + E·cos θ).
    applied = applied_torque(measured.converted, factor, adapter)
    if adapter is not None:
        length, extension, angle = adapter
        stored["adapter"] = {"wrench_length": length, "extension": extension, "angle": angle,
                             "applied": applied}
    judged = verdict(applied, step.limits.min, step.limits.max, None)
    stored.update(verdict=judged.verdict, margin=judged.margin, applied=applied)
    return stored
