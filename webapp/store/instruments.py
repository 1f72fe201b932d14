"""The register of calibrated instruments: each change a new row, the latest row per ID the
instrument as it is now."""

from __future__ import annotations

from datetime import date, datetime
from typing import Any

from sqlite_utils import Database

from ..domain.instruments import Instrument

_LATEST = ("select * from instrument_entries where id in (select max(id) from "
           "instrument_entries group by instrument_id)")


def _instrument(row: dict[str, Any]) -> Instrument:
    return Instrument(instrument_id=row["instrument_id"], kind=row["kind"],
                      range_low=row["range_low"], range_high=row["range_high"],
                      range_unit=row["range_unit"],
                      calibration_due=date.fromisoformat(row["calibration_due"]),
                      status=row["status"])


def record_entry(db: Database, instrument: Instrument, *, change: str,
                 changed_by: int | None, now: datetime) -> None:
    """Append the instrument's new state to the register's log."""
    db.table("instrument_entries").insert({
        "instrument_id": instrument.instrument_id, "kind": instrument.kind,
        "range_low": instrument.range_low, "range_high": instrument.range_high,
        "range_unit": instrument.range_unit,
        "calibration_due": instrument.calibration_due.isoformat(),
        "status": instrument.status, "change": change, "changed_by": changed_by,
        "changed_at": now.isoformat()})


def instrument(db: Database, instrument_id: str) -> Instrument | None:
    """The instrument as it is now, or None when the register has no such ID (the ID is
    matched ignoring case: a scanner or a keyboard may change it)."""
    rows = list(db.query("select * from instrument_entries where instrument_id = ? collate "
                         "nocase order by id desc limit 1", [instrument_id]))
    return _instrument(rows[0]) if rows else None


def all_instruments(db: Database) -> list[Instrument]:
    """Every instrument as it is now, by kind and ID (withdrawn ones too)."""
    return [_instrument(r) for r in db.query(_LATEST + " order by kind, instrument_id")]


def history(db: Database, instrument_id: str) -> list[dict[str, Any]]:
    """Every entry made for an instrument, oldest first."""
    return list(db.query("select * from instrument_entries where instrument_id = ? collate "
                         "nocase order by id", [instrument_id]))
