"""What each person may sign: granting, listing and revoking authorisations.

Rows are never deleted: revoking dates a row, so a record signed under an authorisation
can always name it.
"""

from __future__ import annotations

import json
from datetime import date, datetime
from typing import Any

from sqlite_utils import Database

from ..domain.authorisations import Authorisation, GrantTerms
from . import new_row_id


def _authorisation(row: dict[str, Any]) -> Authorisation:
    return Authorisation(id=row["id"], person_id=row["person_id"],
                         signatures=tuple(json.loads(row["signatures"])),
                         scope=tuple(json.loads(row["scope"])),
                         licence_kind=row["licence_kind"],
                         licence_number=row["licence_number"],
                         expires_on=date.fromisoformat(row["expires_on"]),
                         granted_by=row["granted_by"], granted_at=row["granted_at"],
                         revoked_at=row["revoked_at"])


def grant(db: Database, person_id: int, terms: GrantTerms, *, granted_by: int | None,
          now: datetime) -> Authorisation:
    """Add an authorisation for a person (the terms are checked by the domain first)."""
    table = db.table("authorisations")
    table.insert({"person_id": person_id, "signatures": json.dumps(list(terms.signatures)),
                  "scope": json.dumps(list(terms.scope)), "licence_kind": terms.licence_kind,
                  "licence_number": terms.licence_number,
                  "expires_on": terms.expires_on.isoformat(), "granted_by": granted_by,
                  "granted_at": now.isoformat(), "revoked_at": None})
    return _authorisation(table.get(new_row_id(table)))


def held_by(db: Database, person_id: int, *, include_revoked: bool = False
            ) -> list[Authorisation]:
    """A person's authorisations, newest first: those not revoked (expired ones included:
    expiry is judged on the day a signature is made), or every one ever granted."""
    where = "person_id = ?" + ("" if include_revoked else " and revoked_at is null")
    return [_authorisation(r) for r in db.table("authorisations").rows_where(
        where, [person_id], order_by="id desc")]


def authorisation(db: Database, authorisation_id: int) -> Authorisation | None:
    rows = list(db.table("authorisations").rows_where("id = ?", [authorisation_id], limit=1))
    return _authorisation(rows[0]) if rows else None


def revoke(db: Database, authorisation_id: int, at: datetime) -> bool:
    """End an authorisation from `at` on; False when it was already revoked (or unknown)."""
    cursor = db.execute("update authorisations set revoked_at = ? where id = ? "
                        "and revoked_at is null", [at.isoformat(), authorisation_id])
    return cursor.rowcount == 1
