"""People who use the station: accounts, roles, log-in failures."""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import datetime

from sqlite_utils import Database

from . import new_row_id

ROLES = ("mechanic", "supervisor", "trainer", "admin")


@dataclass(frozen=True)
class Person:
    id: int
    username: str
    full_name: str
    roles: tuple[str, ...]
    authorisation: str | None
    active: bool

    def has(self, role: str) -> bool:
        return role in self.roles


def _person(row: dict) -> Person:
    return Person(id=row["id"], username=row["username"], full_name=row["full_name"],
                  roles=tuple(json.loads(row["roles"])), authorisation=row["authorisation"],
                  active=bool(row["active"]))


def add_person(db: Database, *, username: str, full_name: str, roles: list[str],
               password_hash: str, authorisation: str | None, now: datetime) -> Person:
    """Enrol a person; raises ValueError when the username is taken or a role is unknown."""
    unknown = [r for r in roles if r not in ROLES]
    if unknown:
        raise ValueError(f"unknown role {', '.join(unknown)}; roles are {', '.join(ROLES)}")
    if person_by_username(db, username) is not None:
        raise ValueError(f"the username '{username}' is taken")
    table = db.table("people")
    table.insert({"username": username, "full_name": full_name, "roles": json.dumps(roles),
                  "authorisation": authorisation, "password_hash": password_hash,
                  "active": 1, "created_at": now.isoformat()})
    return _person(table.get(new_row_id(table)))


def person_by_username(db: Database, username: str) -> Person | None:
    rows = list(db.table("people").rows_where("username = ?", [username], limit=1))
    return _person(rows[0]) if rows else None


def person_by_id(db: Database, person_id: int) -> Person | None:
    rows = list(db.table("people").rows_where("id = ?", [person_id], limit=1))
    return _person(rows[0]) if rows else None


def password_hash_of(db: Database, username: str) -> str | None:
    rows = list(db.table("people").rows_where("username = ?", [username], select="password_hash"))
    return rows[0]["password_hash"] if rows else None


def all_people(db: Database) -> list[Person]:
    return [_person(r) for r in db.table("people").rows_where(order_by="full_name")]


def names_by_id(db: Database, ids: set[int]) -> dict[int, str]:
    if not ids:
        return {}
    marks = ",".join("?" * len(ids))
    return {r["id"]: r["full_name"] for r in
            db.query(f"select id, full_name from people where id in ({marks})", list(ids))}


def record_login_failure(db: Database, username: str, at: datetime) -> None:
    db.table("login_failures").insert({"username": username, "at": at.isoformat()})


def login_failures_since(db: Database, username: str, since: datetime) -> int:
    row = next(db.query("select count(*) as n from login_failures where username = ? "
                        "and at >= ?", [username, since.isoformat()]))
    return int(row["n"])


def clear_login_failures(db: Database, username: str) -> None:
    db.execute("delete from login_failures where username = ?", [username])


def revoke(db: Database, person_id: int, at: datetime) -> None:
    """End a person's access: no log-in, no new signature (their earlier ones stay valid)."""
    db.execute("update people set active = 0 where id = ?", [person_id])
    db.execute("update signers set revoked_at = ? where person_id = ? and revoked_at is null",
               [at.isoformat(), person_id])
