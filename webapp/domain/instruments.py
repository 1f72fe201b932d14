"""The station's calibrated instruments: what an entry of the register must say, and whether
an instrument may be used for a reading (its kind, its calibration on the day, its status,
and the reading inside its range).

Decision rule (conservative): an instrument is used only when every one of these is sure.
The calibration is in on its due date and out from the day after; a value is in range when,
converted with pint to the instrument's own unit, it lies within the range's ends (the ends
included; a relative 1e-9 allows for the conversion's floating-point round-off only, never for
the instrument's accuracy). A value whose dimension cannot be compared with the range is out
of range. Anything else is refused with the reason, and the reading is not kept.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, replace
from datetime import date
from typing import Any, get_args

from .errors import RuleRefusal
from .procedure_types import INSTRUMENT_KINDS, InstrumentKind
from .readings import InputProblem, read_number
from .units import UnitProblem, parse_unit, registry

assert tuple(INSTRUMENT_KINDS) == get_args(InstrumentKind)
IN_SERVICE = "in service"
STATUSES = (IN_SERVICE, "quarantined", "withdrawn")
ROUND_OFF = 1e-9
_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9./_-]{0,39}$")


@dataclass(frozen=True)
class Instrument:
    """One instrument as the register holds it now."""

    instrument_id: str
    kind: str
    range_low: float
    range_high: float
    range_unit: str
    calibration_due: date
    status: str = IN_SERVICE

    @property
    def range_text(self) -> str:
        return f"{self.range_low:g}–{self.range_high:g} {self.range_unit}"

    def calibration_in(self, today: date) -> bool:
        """In calibration on `today`: due today is still in (common practice, no source)."""
        return today <= self.calibration_due

    def usable_for(self, kind: str, today: date) -> bool:
        return (self.kind == kind and self.status == IN_SERVICE
                and self.calibration_in(today))

    def as_record(self) -> dict[str, Any]:
        """What a reading keeps of the instrument it was taken with (printed on the record)."""
        return {"id": self.instrument_id, "kind": self.kind, "range": self.range_text,
                "range_low": self.range_low, "range_high": self.range_high,
                "range_unit": self.range_unit,
                "calibration_due": self.calibration_due.isoformat()}


def normal_id(raw: Any) -> str:
    """An instrument ID as typed or scanned, trimmed; InputProblem when it cannot be one."""
    text = raw.strip() if isinstance(raw, str) else ""
    if not text:
        raise InputProblem("instrument_id", "Choose the instrument from the register, or "
                           "scan or type its ID.")
    if not _ID.fullmatch(text):
        raise InputProblem("instrument_id", f"'{text[:40]}' is not an instrument ID: letters, "
                           "digits and . / _ - only, at most 40 characters.")
    return text


def check_entry(*, instrument_id: Any, kind: Any, range_low: Any, range_high: Any,
                range_unit: Any, calibration_due: Any, status: Any = IN_SERVICE
                ) -> Instrument:
    """An entry for the register, or InputProblem naming the field that is wrong."""
    ident = normal_id(instrument_id)
    if kind not in INSTRUMENT_KINDS:
        raise InputProblem("kind", "Choose the kind: " + ", ".join(INSTRUMENT_KINDS) + ".")
    low = read_number("range_low", range_low)
    high = read_number("range_high", range_high)
    if low < 0:
        raise InputProblem("range_low", "The range starts at zero or above.")
    if high <= low:
        raise InputProblem("range_high", "The range's top must be above its bottom.")
    unit_text = range_unit.strip() if isinstance(range_unit, str) else ""
    try:
        parse_unit(unit_text, INSTRUMENT_KINDS[kind])
    except UnitProblem as problem:
        said = str(problem)
        raise InputProblem("range_unit", said[:1].upper() + said[1:] + ".") from None
    due = _due_date(calibration_due)
    if status not in STATUSES:
        raise InputProblem("status", "Choose the status: " + ", ".join(STATUSES) + ".")
    return Instrument(ident, kind, low, high, unit_text, due, status)


def required_kind(step: Any) -> str | None:
    """The kind of instrument a step's reading is taken with: a torque step's is a torque
    wrench; a reading or count names its own (`instrument:`), or needs none."""
    if getattr(step, "kind", None) == "torque":
        return "torque wrench"
    kind = getattr(step, "instrument", None)
    return str(kind) if kind else None


def in_range(instrument: Instrument, value: float, unit: str) -> bool:
    """Whether `value` `unit`, converted to the instrument's unit, is inside its range (see
    the module's decision rule)."""
    try:
        converted = registry().Quantity(value, parse_unit(unit)).to(
            parse_unit(instrument.range_unit)).magnitude
    except Exception:  # not a unit, or another dimension: cannot be sure, so not in range
        return False
    slack = ROUND_OFF * max(abs(instrument.range_low), abs(instrument.range_high))
    return bool(math.isfinite(converted)
                and instrument.range_low - slack <= converted <= instrument.range_high + slack)


def check_use(instrument: Instrument | None, data: Mapping[str, Any], kind: str, today: date,
              value: tuple[float, str] | None) -> dict[str, Any]:
    """The instrument a reading names (`data["instrument_id"]`, looked up in the register as
    `instrument`) may take it: known, of the step's kind, in service, in calibration today,
    and `value` (number, unit as read on it) inside its range. Returns what the reading keeps
    of it; RuleRefusal with the reason otherwise."""
    ident = normal_id(data.get("instrument_id"))
    if instrument is None:
        raise RuleRefusal("instrument_unknown", f"{ident} is not in the station's register of "
                          f"instruments: use a registered {kind}, or ask the admin to add it.",
                          instrument_id=ident)
    name = f"{instrument.kind.capitalize()} {instrument.instrument_id}"
    if instrument.kind != kind:
        raise RuleRefusal("instrument_wrong_kind", f"{instrument.instrument_id} is a "
                          f"{instrument.kind}; this reading is taken with a {kind}.",
                          instrument_id=ident, needed=kind, kind=instrument.kind)
    if instrument.status != IN_SERVICE:
        raise RuleRefusal("instrument_not_in_service", f"{name} is {instrument.status}: use "
                          f"another {kind}.", instrument_id=ident, status=instrument.status)
    if not instrument.calibration_in(today):
        raise RuleRefusal("instrument_out_of_calibration", f"{name} was due for calibration "
                          f"on {instrument.calibration_due.isoformat()}: use a {kind} in "
                          "calibration.", instrument_id=ident,
                          calibration_due=instrument.calibration_due.isoformat())
    if value is not None and not in_range(instrument, *value):
        number, unit = value
        raise RuleRefusal("instrument_out_of_range", f"{number:g} {unit} is outside the range "
                          f"of {name} ({instrument.range_text}): take the reading with a "
                          f"{kind} whose range covers it.", instrument_id=ident,
                          range=instrument.range_text)
    return instrument.as_record()


def with_instrument(step: Any, data: Mapping[str, Any], stored: dict[str, Any],
                    instrument: Instrument | None, today: date) -> dict[str, Any]:
    """A step's evaluated reading (`stored`) with the register's instrument it names, checked
    for the step by `check_use`: for a count the window it timed, for a torque the wrench's
    setting, else the value as read are what must be in its range."""
    kind = required_kind(step)
    if kind is None:
        return stored
    value: tuple[float, str] | None = None
    if getattr(step, "kind", None) == "spark_count":
        value = (float(stored["window_s"]), "s") if stored.get("window_s") else None
    elif "value" in stored and "unit" in stored:
        value = (float(stored["value"]), str(stored["unit"]))
    return {**stored, "instrument": check_use(instrument, data, kind, today, value)}


def _due_date(raw: Any) -> date:
    if isinstance(raw, date):
        return raw
    try:
        return date.fromisoformat(str(raw).strip())
    except ValueError:
        raise InputProblem("calibration_due", "Give the calibration due date "
                           "(YYYY-MM-DD).") from None


def calibrated(current: Instrument, due: Any, today: date) -> Instrument:
    """The instrument after a calibration: its new due date (today or later), and back in
    service if it was quarantined. A withdrawn instrument stays withdrawn."""
    new_due = _due_date(due)
    if current.status == "withdrawn":
        raise InputProblem("instrument_id", f"{current.instrument_id} is withdrawn: register "
                           "it again under a new ID if it comes back.")
    if new_due < today:
        raise InputProblem("calibration_due", f"{new_due.isoformat()} is already past: a "
                           "calibration gives a due date still to come.")
    return replace(current, calibration_due=new_due, status=IN_SERVICE)


def taken_out(current: Instrument, status: Any) -> Instrument:
    """The instrument quarantined (out of service until calibrated or checked) or withdrawn
    (for good)."""
    if status not in ("quarantined", "withdrawn"):
        raise InputProblem("status", "Take it out as quarantined or withdrawn.")
    if current.status == "withdrawn":
        raise InputProblem("instrument_id", f"{current.instrument_id} is already withdrawn.")
    return replace(current, status=status)
