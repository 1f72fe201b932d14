"""Log-in sessions kept on the station, found by the SHA-256 of the browser's token."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

from sqlite_utils import Database

from .people import Person, person_from_row

USER_AGENT_KEPT = 120  # enough to tell a tablet from a desk, not a fingerprint


@dataclass(frozen=True)
class OpenSession:
    """A session found by its token, with the person it belongs to."""

    token_hash: str
    person: Person
    created_at: datetime
    last_seen_at: datetime
    ended_at: datetime | None


def open_session(db: Database, *, token_hash: str, person_id: int, now: datetime,
                 client_address: str | None, user_agent: str | None) -> None:
    db.table("sessions").insert({
        "token_hash": token_hash, "person_id": person_id, "created_at": now.isoformat(),
        "last_seen_at": now.isoformat(), "client_address": client_address,
        "user_agent": (user_agent or "")[:USER_AGENT_KEPT] or None,
    })


def session_by_token_hash(db: Database, token_hash: str) -> OpenSession | None:
    """The session and its person in one look-up (this runs on every request)."""
    rows = list(db.query(
        "select s.created_at as s_created_at, s.last_seen_at, s.ended_at, p.* "
        "from sessions s join people p on p.id = s.person_id where s.token_hash = ?",
        [token_hash]))
    if not rows:
        return None
    row = rows[0]
    return OpenSession(token_hash=token_hash, person=person_from_row(row),
                       created_at=datetime.fromisoformat(row["s_created_at"]),
                       last_seen_at=datetime.fromisoformat(row["last_seen_at"]),
                       ended_at=(datetime.fromisoformat(row["ended_at"])
                                 if row["ended_at"] else None))


def touch(db: Database, token_hash: str, now: datetime) -> None:
    db.execute("update sessions set last_seen_at = ? where token_hash = ? and ended_at is null",
               [now.isoformat(), token_hash])


def end_session(db: Database, token_hash: str, now: datetime, why: str) -> None:
    db.execute("update sessions set ended_at = ?, ended_why = ? "
               "where token_hash = ? and ended_at is null", [now.isoformat(), why, token_hash])


def end_sessions_of(db: Database, person_id: int, now: datetime, why: str) -> int:
    """End every session of a person still open; the number ended."""
    cursor = db.execute("update sessions set ended_at = ?, ended_why = ? "
                        "where person_id = ? and ended_at is null",
                        [now.isoformat(), why, person_id])
    return int(cursor.rowcount)


def logged_in_from(db: Database, username: str, address: str, since: datetime) -> bool:
    """Whether this name logged in successfully from this address since then."""
    rows = db.query("select 1 from sessions s join people p on p.id = s.person_id "
                    "where p.username = ? and s.client_address = ? and s.created_at >= ? "
                    "limit 1", [username, address, since.isoformat()])
    return next(iter(rows), None) is not None


def open_sessions_by_person(db: Database, *, created_since: datetime,
                            seen_since: datetime) -> dict[int, dict]:
    """Per person: sessions not ended and within both limits (count, last seen)."""
    return {r["person_id"]: {"count": r["n"], "last_seen_at": r["last_seen_at"]}
            for r in db.query(
                "select person_id, count(*) as n, max(last_seen_at) as last_seen_at "
                "from sessions where ended_at is null and created_at > ? "
                "and last_seen_at > ? group by person_id",
                [created_since.isoformat(), seen_since.isoformat()])}


def sessions_of(db: Database, person_id: int, *, created_since: datetime,
                seen_since: datetime) -> list[dict]:
    """A person's sessions still open and within both limits, newest first: a number for
    each (its row), when it began and was last seen, from where and on what."""
    return list(db.query(
        "select rowid as number, token_hash, created_at, last_seen_at, client_address, "
        "user_agent from sessions where person_id = ? and ended_at is null "
        "and created_at > ? and last_seen_at > ? order by last_seen_at desc",
        [person_id, created_since.isoformat(), seen_since.isoformat()]))


def end_numbered(db: Database, person_id: int, numbers: list[int], now: datetime,
                 why: str) -> int:
    """End the person's own open sessions among `numbers` (another's are left alone)."""
    ended = 0
    for number in numbers:
        cursor = db.execute("update sessions set ended_at = ?, ended_why = ? where rowid = ? "
                            "and person_id = ? and ended_at is null",
                            [now.isoformat(), why, number, person_id])
        ended += int(cursor.rowcount)
    return ended
