"""The store: durable pragmas, append-only events, migrations recorded by name."""

from __future__ import annotations

import sqlite3

import pytest

from webapp import store
from webapp.domain.chain import first_broken_link
from webapp.store import jobs as job_store


def test_connection_pragmas(db):
    conn = db.conn
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert conn.execute("PRAGMA synchronous").fetchone()[0] == 2  # FULL
    assert conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
    assert conn.execute("PRAGMA busy_timeout").fetchone()[0] == store.BUSY_TIMEOUT_MS


def test_migrations_are_recorded_by_name(db):
    names = [r["name"] for r in db["_sqlite_migrations"].rows]
    assert names[0] == "0001_people_fleet_procedures_jobs_events"
    assert store.migrate(db) == []


def _job_with_events(mechanic):
    mechanic.post_json("/api/jobs", {"procedure": "exciter-removal", "engine": 1,
                                     "channel": "A"})
    mechanic.post_json("/api/jobs/1/events", {"id": "5d1c2b0e-8f1a-4d7e-9c38-1f2e3d4c5b6a",
                                              "kind": "step_done", "step": "identify"})


def test_events_cannot_be_edited_or_deleted(mechanic, db):
    _job_with_events(mechanic)
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        db.execute("update events set data = '{}' where seq = 2")
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        db.execute("delete from events")
    assert db["events"].count == 2


def test_an_edit_behind_the_station_s_back_breaks_the_chain(mechanic, db):
    _job_with_events(mechanic)
    events = job_store.events(db, 1)
    assert first_broken_link(events) is None
    # Someone drops the trigger and edits a row directly in the file.
    db.execute("drop trigger events_no_update")
    db.execute("update events set step_id = 'selectors-off' where seq = 2")
    db.conn.commit()
    assert first_broken_link(job_store.events(db, 1)) == 2


def test_foreign_keys_are_enforced(db):
    with pytest.raises(sqlite3.IntegrityError):
        db.execute("insert into engines (aircraft_id, position, model, serial) "
                   "values (9999, 1, 'QT-610', 'X')")
