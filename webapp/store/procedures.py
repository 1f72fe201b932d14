"""Procedure revisions as stored: content, SHA-256 and status (draft, approved, superseded)."""

from __future__ import annotations

from datetime import datetime

from sqlite_utils import Database


def store_revision(db: Database, *, procedure_id: str, title: str, content: str,
                   content_hash: str, status: str, source_file: str | None,
                   now: datetime) -> bool:
    """Store a revision unless the same content is stored already; True if it was new.

    Approving a new revision supersedes the procedure's earlier approved one.
    """
    if db.table("procedure_revisions").count_where("hash = ?", [content_hash]):
        return False
    db.table("procedures").upsert({"id": procedure_id, "title": title}, pk="id")
    number = next(db.query("select coalesce(max(number), 0) + 1 as n from procedure_revisions "
                           "where procedure_id = ?", [procedure_id]))["n"]
    if status == "approved":
        db.execute("update procedure_revisions set status = 'superseded' "
                   "where procedure_id = ? and status = 'approved'", [procedure_id])
    db.table("procedure_revisions").insert({
        "hash": content_hash, "procedure_id": procedure_id, "number": number,
        "content": content, "status": status, "source_file": source_file,
        "created_at": now.isoformat()})
    return True


def approved_revisions(db: Database) -> list[dict]:
    """The approved revision of each procedure, by procedure id."""
    return list(db.query(
        "select r.hash, r.procedure_id, r.number, r.content, r.created_at, p.title "
        "from procedure_revisions r join procedures p on p.id = r.procedure_id "
        "where r.status = 'approved' order by r.procedure_id"))


def approved_revision(db: Database, procedure_id: str) -> dict | None:
    rows = list(db.table("procedure_revisions").rows_where(
        "procedure_id = ? and status = 'approved'", [procedure_id], limit=1))
    return rows[0] if rows else None


def revision(db: Database, content_hash: str) -> dict | None:
    rows = list(db.table("procedure_revisions").rows_where("hash = ?", [content_hash], limit=1))
    return rows[0] if rows else None
