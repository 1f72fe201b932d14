"""People who use the station: accounts, roles, failed log-ins."""

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


def person_from_row(row: dict) -> Person:
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
    return person_from_row(table.get(new_row_id(table)))


def person_by_username(db: Database, username: str) -> Person | None:
    rows = list(db.table("people").rows_where("username = ?", [username], limit=1))
    return person_from_row(rows[0]) if rows else None


def person_by_id(db: Database, person_id: int) -> Person | None:
    rows = list(db.table("people").rows_where("id = ?", [person_id], limit=1))
    return person_from_row(rows[0]) if rows else None


def password_hash_of(db: Database, username: str) -> str | None:
    rows = list(db.table("people").rows_where("username = ?", [username], select="password_hash"))
    return rows[0]["password_hash"] if rows else None


def all_people(db: Database) -> list[Person]:
    return [person_from_row(r) for r in db.table("people").rows_where(order_by="full_name")]


def names_by_id(db: Database, ids: set[int]) -> dict[int, str]:
    if not ids:
        return {}
    marks = ",".join("?" * len(ids))
    return {r["id"]: r["full_name"] for r in
            db.query(f"select id, full_name from people where id in ({marks})", list(ids))}


def record_login_failure(db: Database, username: str, address: str | None,
                         at: datetime) -> None:
    db.table("login_failures").insert({"username": username, "address": address,
                                       "at": at.isoformat()})


def login_failures(db: Database, *, username: str, address: str | None,
                   since: datetime) -> dict[str, tuple[int, str | None]]:
    """Failures not cleared since then, counted for the name from this address ("pair"),
    from the address ("address") and for the name ("name"): (count, latest ISO time)."""
    counted = {}
    for scope, where, args in (
            ("pair", "username = ? and address is ?", [username, address]),
            ("address", "address is ?", [address]),
            ("name", "username = ?", [username])):
        row = next(iter(db.query(
            f"select count(*) as n, max(at) as latest from login_failures where {where} "
            "and cleared_at is null and at >= ?", [*args, since.isoformat()])))
        counted[scope] = (int(row["n"]), row["latest"])
    return counted


def clear_login_failures(db: Database, *, now: datetime, why: str, username: str | None = None,
                         address: str | None = None, any_address: bool = False) -> int:
    """Mark failures as cleared (kept as a log): of a name from an address, of a name from
    anywhere (`any_address`), or of an address whatever the name (`username` None)."""
    if username is None and any_address:
        raise ValueError("clearing every failure everywhere is not a thing to do by accident")
    where: list[str] = ["cleared_at is null"]
    args: list[str | None] = []
    if username is not None:
        where.append("username = ?")
        args.append(username)
    if not any_address:
        where.append("address is ?")
        args.append(address)
    cursor = db.execute(f"update login_failures set cleared_at = ?, cleared_why = ? "
                        f"where {' and '.join(where)}", [now.isoformat(), why, *args])
    return int(cursor.rowcount)


def login_failure_groups(db: Database, since: datetime) -> list[dict]:
    """Failures not cleared since then, grouped three ways (scope, username, address, count,
    latest), most failures first: what the admin's page weighs against the throttle."""
    groups = []
    for scope, keys in (("pair", "username, address"), ("name", "username"),
                        ("address", "address")):
        for row in db.query(
                f"select {keys}, count(*) as n, max(at) as latest from login_failures "
                f"where cleared_at is null and at >= ? group by {keys} order by n desc",
                [since.isoformat()]):
            groups.append({"scope": scope, "username": row.get("username"),
                           "address": row.get("address"), "count": int(row["n"]),
                           "latest": row["latest"]})
    return groups


def revoke(db: Database, person_id: int, at: datetime) -> None:
    """End a person's access: no log-in, no new signature (their earlier ones stay valid).
    Their open sessions are ended beside this (`station.accounts.revoke_access`)."""
    db.execute("update people set active = 0 where id = ?", [person_id])
    db.execute("update signers set revoked_at = ? where person_id = ? and revoked_at is null",
               [at.isoformat(), person_id])
