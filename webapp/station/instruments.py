"""Keeping the register of calibrated instruments: for the admin page, the CLI and the demo.

Every change is a new entry in the register's log (who, when, what); nothing is edited."""

from __future__ import annotations

from datetime import date, datetime
from typing import Any

from .. import store
from ..domain import instruments
from ..domain.instruments import Instrument
from ..domain.readings import InputProblem
from ..store import instruments as register


def add(db: store.Database, *, instrument_id: Any, kind: Any, range_low: Any, range_high: Any,
        range_unit: Any, calibration_due: Any, by: int | None, now: datetime) -> Instrument:
    """Register an instrument. InputProblem names the field that is wrong (nothing is kept),
    an ID already in the register included."""
    entry = instruments.check_entry(instrument_id=instrument_id, kind=kind,
                                    range_low=range_low, range_high=range_high,
                                    range_unit=range_unit, calibration_due=calibration_due)
    with store.writing(db):
        if register.instrument(db, entry.instrument_id) is not None:
            raise InputProblem("instrument_id", f"{entry.instrument_id} is already in the "
                               "register: record its calibration or take it out instead.")
        register.record_entry(db, entry, change="added", changed_by=by, now=now)
    return entry


def _current(db: store.Database, instrument_id: Any) -> Instrument:
    ident = instruments.normal_id(instrument_id)
    found = register.instrument(db, ident)
    if found is None:
        raise InputProblem("instrument_id", f"{ident} is not in the register.")
    return found


def calibrated(db: store.Database, *, instrument_id: Any, calibration_due: Any | date,
               by: int | None, now: datetime) -> Instrument:
    """Record a calibration: the new due date (a quarantined instrument is back in service)."""
    with store.writing(db):
        current = _current(db, instrument_id)
        after = instruments.calibrated(current, calibration_due, now.date())
        register.record_entry(db, after, change=f"calibrated, due "
                              f"{after.calibration_due.isoformat()}", changed_by=by, now=now)
    return after


def take_out(db: store.Database, *, instrument_id: Any, status: Any, by: int | None,
             now: datetime) -> Instrument:
    """Quarantine or withdraw an instrument: no reading is taken with it from now on."""
    with store.writing(db):
        current = _current(db, instrument_id)
        after = instruments.taken_out(current, status)
        register.record_entry(db, after, change=str(status), changed_by=by, now=now)
    return after
