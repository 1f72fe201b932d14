"""Granting and revoking what a person may sign: for the admin page, the CLI and the demo."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import date, datetime

from .. import store
from ..domain.authorisations import Authorisation, check_grant
from ..store import authorisations, people
from ..store.job_states import NotFound


def authorise(db: store.Database, *, person_id: int, signatures: str | Sequence[str],
              scope: str | Sequence[str], licence_kind: str, licence_number: str,
              expires_on: str | date, granted_by: int | None, now: datetime
              ) -> Authorisation:
    """Grant a person an authorisation. Raises readings.InputProblem naming the field that is
    wrong (nothing is kept then), NotFound for an unknown person."""
    terms = check_grant(signatures=signatures, scope=scope, licence_kind=licence_kind,
                        licence_number=licence_number, expires_on=expires_on,
                        today=now.date())
    with store.writing(db):
        if people.person_by_id(db, person_id) is None:
            raise NotFound(f"person {person_id} is not enrolled")
        return authorisations.grant(db, person_id, terms, granted_by=granted_by, now=now)


def withdraw(db: store.Database, *, person_id: int, authorisation_id: int,
             now: datetime) -> bool:
    """Revoke one of a person's authorisations from now on; False when it already was.
    Raises NotFound when the person holds no such authorisation."""
    with store.writing(db):
        found = authorisations.authorisation(db, authorisation_id)
        if found is None or found.person_id != person_id:
            raise NotFound(f"person {person_id} holds no authorisation {authorisation_id}")
        return authorisations.revoke(db, authorisation_id, now)
