"""The station's SQLite database: the only place that imports sqlite_utils.

Open a connection per request with `connect(path)`; wrap read-then-write work in
`with writing(db):` (BEGIN IMMEDIATE, so two tablets never interleave a check and
its write). Query modules are named for what they hold: people, fleet,
procedures, jobs.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from sqlite_utils import Database
from sqlite_utils.db import Table

from .migrations import MIGRATIONS
from .writer_lock import writer_lock

BUSY_TIMEOUT_MS = 5000

__all__ = ["Database", "connect", "create", "new_row_id", "writing"]


def new_row_id(table: Table) -> int:
    """The integer key of the row a table's last insert made."""
    assert table.last_pk is not None, "no row was inserted"
    return int(table.last_pk)


def connect(path: str | Path) -> Database:
    """Open the database with the station's pragmas (durable, checked, patient)."""
    conn = sqlite3.connect(str(path), timeout=BUSY_TIMEOUT_MS / 1000)
    db = Database(conn)
    db.writer_lock = writer_lock(path)  # type: ignore[attr-defined]
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    conn.execute("PRAGMA foreign_keys = ON")
    # FULL: an acknowledged event survives a power cut (NORMAL may lose the last one in WAL).
    conn.execute("PRAGMA synchronous = FULL")
    return db


def create(path: str | Path) -> Database:
    """Open (creating if needed) and bring the schema up to date."""
    Path(path).parent.mkdir(parents=True, exist_ok=True)
    db = connect(path)
    db.conn.execute("PRAGMA journal_mode = WAL")
    MIGRATIONS.apply(db)
    return db


def migrate(db: Database) -> list[str]:
    """Apply pending migrations; return the names applied."""
    pending = [m.name for m in MIGRATIONS.pending(db)]
    MIGRATIONS.apply(db)
    return pending


@contextmanager
def writing(db: Database) -> Iterator[Database]:
    """A read-then-write transaction taken with BEGIN IMMEDIATE, after the station's own
    writer queue (`writer_lock`: woken at once, where SQLite's busy handler sleeps)."""
    lock = getattr(db, "writer_lock", None)
    if lock is None:
        lock = db.writer_lock = writer_lock(_main_file(db))  # type: ignore[attr-defined]
    with lock:
        db.conn.execute("BEGIN IMMEDIATE")
        try:
            yield db
        except BaseException:
            db.conn.execute("ROLLBACK")
            raise
        db.conn.execute("COMMIT")


def _main_file(db: Database) -> str:
    """The file of a connection opened without `connect` (":memory:" when none)."""
    for row in db.conn.execute("PRAGMA database_list"):
        if row[1] == "main":
            return row[2] or ":memory:"
    return ":memory:"
