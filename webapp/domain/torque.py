"""Torque readings: the wrench setting as the mechanic's wrench showed it, the torque it
means at the fastener (lubricant factor, adapter), the wrench's calibration, the verdict."""

from __future__ import annotations

from collections.abc import Mapping
from datetime import date
from typing import Any

from .errors import RuleRefusal
from .procedures import Torque
from .readings import InputProblem, measure, read_number, verdict


def adapter_setting(required: float, wrench_length: float, extension: float) -> float:
    """The wrench setting for a required torque with an extension: T_set = T_req·L/(L+E)."""
    if wrench_length <= 0:
        raise InputProblem("wrench_length", "The wrench length must be above zero.")
    if extension < 0:
        raise InputProblem("extension", "The adapter's extension is zero or more.")
    return required * wrench_length / (wrench_length + extension)


def evaluate_torque(step: Torque, data: Mapping[str, Any], today: date) -> dict[str, Any]:
    """Torque as applied (wrench setting corrected for an adapter), with its wrench."""
    wrench = data.get("wrench_id")
    if not isinstance(wrench, str) or not wrench.strip():
        raise InputProblem("wrench_id", "Enter the torque wrench's ID.")
    due_text = data.get("calibration_due")
    try:
        due = date.fromisoformat(str(due_text))
    except ValueError:
        raise InputProblem("calibration_due", "Enter the wrench's calibration due date "
                           "(YYYY-MM-DD).") from None
    if due < today:
        raise RuleRefusal("wrench_out_of_calibration", f"Wrench {wrench.strip()} was due for "
                          f"calibration on {due.isoformat()}: use a wrench in calibration.")
    measured = measure("value", data.get("value"), data.get("unit"), step.unit, "torque")
    # The data's torque is for its stated condition; where it gives a lubricant factor the
    # wrench is set to required × factor, so what the limits judge is the setting ÷ factor
    # (the same factor the page applies to the setting it shows; one formula, both ways).
    factor = step.lubricant_factor or 1.0
    applied = measured.converted / factor
    stored: dict[str, Any] = {**measured.as_data(), "wrench_id": wrench.strip(),
                              "calibration_due": due.isoformat()}
    if step.lubricant_factor is not None:
        stored["lubricant_factor"] = step.lubricant_factor
    adapter = data.get("adapter")
    if adapter is not None:
        if not step.adapter:
            raise InputProblem("adapter", "This step's data gives no adapter.")
        if not isinstance(adapter, Mapping):
            raise InputProblem("adapter", "Give the wrench length and the adapter's extension.")
        length = read_number("wrench_length", adapter.get("wrench_length"))
        extension = read_number("extension", adapter.get("extension"))
        setting_factor = adapter_setting(1.0, length, extension)
        applied = measured.converted / setting_factor / factor  # read low by L/(L+E)
        stored["adapter"] = {"wrench_length": length, "extension": extension,
                             "applied": applied}
    judged = verdict(applied, step.limits.min, step.limits.max, None)
    stored.update(verdict=judged.verdict, margin=judged.margin, applied=applied)
    return stored
