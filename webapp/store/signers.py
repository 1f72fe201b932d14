"""Signing identities as stored: certificates, sealed keys, PIN failures; and signed records."""

from __future__ import annotations

from datetime import datetime

from sqlite_utils import Database

from . import new_row_id


def add_signer(db: Database, person_id: int, cert_pem: str, sealed_key: str,
               now: datetime) -> None:
    db.table("signers").upsert({"person_id": person_id, "cert_pem": cert_pem,
                                "sealed_key": sealed_key, "enrolled_at": now.isoformat(),
                                "revoked_at": None}, pk="person_id")


def signer(db: Database, person_id: int) -> dict | None:
    rows = list(db.table("signers").rows_where("person_id = ?", [person_id], limit=1))
    return rows[0] if rows else None


def record_pin_failure(db: Database, person_id: int, at: datetime) -> None:
    db.table("pin_failures").insert({"person_id": person_id, "at": at.isoformat()})


def pin_failures_since(db: Database, person_id: int, since: datetime) -> int:
    row = next(db.query("select count(*) as n from pin_failures where person_id = ? "
                        "and at >= ?", [person_id, since.isoformat()]))
    return int(row["n"])


def clear_pin_failures(db: Database, person_id: int) -> None:
    db.execute("delete from pin_failures where person_id = ?", [person_id])


def add_record(db: Database, *, job_id: int, revision: int, pdf: bytes, chain_hash: str,
               signatures: int, now: datetime, supersedes: int | None = None,
               reason: str | None = None) -> int:
    return new_row_id(db.table("records").insert({
        "job_id": job_id, "revision": revision, "pdf": pdf, "chain_hash": chain_hash,
        "signatures": signatures, "created_at": now.isoformat(), "supersedes": supersedes,
        "reason": reason}))


def latest_record(db: Database, job_id: int) -> dict | None:
    rows = list(db.query("select * from records where job_id = ? "
                         "order by revision desc, signatures desc limit 1", [job_id]))
    return rows[0] if rows else None


def record(db: Database, record_id: int) -> dict | None:
    rows = list(db.table("records").rows_where("id = ?", [record_id], limit=1))
    return rows[0] if rows else None


def records_of(db: Database, job_id: int) -> list[dict]:
    return list(db.query("select id, job_id, revision, signatures, chain_hash, created_at, "
                         "supersedes, reason from records where job_id = ? "
                         "order by revision, signatures", [job_id]))


def stored_states(db: Database, job_id: int) -> list[dict]:
    """Every signed state of a job's record the station kept (revision, signatures, when,
    why, and the PDF bytes), oldest first: what a file is checked against."""
    return list(db.query("select id, revision, signatures, created_at, supersedes, reason, pdf "
                         "from records where job_id = ? order by revision, signatures",
                         [job_id]))


def revoked_signers(db: Database) -> list[dict]:
    """Every revoked signing identity: its certificate and when access ended."""
    return list(db.query("select person_id, cert_pem, revoked_at from signers "
                         "where revoked_at is not null"))
