"""Jobs and their append-only event log (with refusals kept beside it)."""

from __future__ import annotations

import json
from datetime import datetime

from sqlite_utils import Database

from . import new_row_id


def create_job(db: Database, *, engine_id: int, procedure_id: str, revision_hash: str,
               channel: str | None, opened_by: int, now: datetime) -> int:
    return new_row_id(db.table("jobs").insert({
        "engine_id": engine_id, "procedure_id": procedure_id, "revision_hash": revision_hash,
        "channel": channel, "status": "open", "progress": "in work", "opened_by": opened_by,
        "opened_at": now.isoformat()}))


def set_job_status(db: Database, job_id: int, status: str, progress: str) -> None:
    """The job's status (open, complete) and where it stands in the job list's words."""
    db.execute("update jobs set status = ?, progress = ? where id = ?",
               [status, progress, job_id])


_JOB_SELECT = (
    "select j.*, p.title as procedure_title, r.number as revision_number, "
    "e.serial as engine_serial, e.model as engine_model, e.position, "
    "a.registration, a.id as aircraft_id, o.full_name as opened_by_name "
    "from jobs j join procedures p on p.id = j.procedure_id "
    "join procedure_revisions r on r.hash = j.revision_hash "
    "join engines e on e.id = j.engine_id join aircraft a on a.id = e.aircraft_id "
    "join people o on o.id = j.opened_by ")


def job(db: Database, job_id: int) -> dict | None:
    rows = list(db.query(_JOB_SELECT + "where j.id = ?", [job_id]))
    return rows[0] if rows else None


def jobs(db: Database, status: str | None = None) -> list[dict]:
    """Jobs, newest first, optionally only those with one status."""
    where, params = ("where j.status = ? ", [status]) if status else ("", [])
    return list(db.query(_JOB_SELECT + where + "order by j.id desc", params))


def _event(row: dict) -> dict:
    return {**row, "data": json.loads(row["data"])}


def events(db: Database, job_id: int) -> list[dict]:
    """The job's events in order, data decoded."""
    rows = db.table("events").rows_where("job_id = ?", [job_id], order_by="seq")
    return [_event(r) for r in rows]


def event(db: Database, event_id: str) -> dict | None:
    rows = list(db.table("events").rows_where("id = ?", [event_id], limit=1))
    return _event(rows[0]) if rows else None


def engine_events(db: Database, engine_id: int, kinds: tuple[str, ...]) -> list[dict]:
    """Events of the given kinds from every job on an engine, in the order they were stored."""
    marks = ",".join("?" * len(kinds))
    rows = db.query(
        f"select e.* from events e join jobs j on j.id = e.job_id where j.engine_id = ? "
        f"and e.kind in ({marks}) order by e.rowid", [engine_id, *kinds])
    return [_event(r) for r in rows]


def chain_head(db: Database, job_id: int) -> dict | None:
    """The job's latest event's seq and hash (None when it has no events)."""
    rows = list(db.query("select seq, hash from events where job_id = ? "
                         "order by seq desc limit 1", [job_id]))
    return rows[0] if rows else None


def append_event(db: Database, record: dict) -> None:
    """Append one fully formed event (hash included). Ignores a UUID already stored."""
    db.execute(
        "insert or ignore into events (id, job_id, seq, step_id, kind, data, person_id, "
        "device_time, device_sent, received_at, prev_hash, hash) "
        "values (?,?,?,?,?,?,?,?,?,?,?,?)",
        [record["id"], record["job_id"], record["seq"], record["step_id"], record["kind"],
         json.dumps(record["data"], sort_keys=True), record["person_id"],
         record["device_time"], record.get("device_sent"), record["received_at"],
         record["prev_hash"], record["hash"]])


def remember_request(db: Database, event_id: str, digest: str) -> None:
    """Keep the digest of what the device sent for a stored event (see 0010_event_requests)."""
    db.execute("insert or ignore into event_requests (event_id, digest) values (?, ?)",
               [event_id, digest])


def request_digest(db: Database, event_id: str) -> str | None:
    """The digest of what the device sent for a stored event; None for events stored before
    digests were kept."""
    row = db.execute("select digest from event_requests where event_id = ?",
                     [event_id]).fetchone()
    return row[0] if row else None


def record_refusal(db: Database, *, event_id: str | None, job_id: int, person_id: int,
                   kind: str, step_id: str | None, data: dict, rule: str, reason: str,
                   now: datetime, tell_person_id: int | None = None,
                   notice: str | None = None) -> None:
    """Keep a refused event and why; `tell_person_id` is told `notice` on the job's page
    (someone whose entry came first)."""
    db.table("refusals").insert({
        "event_id": event_id, "job_id": job_id, "person_id": person_id, "kind": kind,
        "step_id": step_id, "data": json.dumps(data, sort_keys=True), "rule": rule,
        "reason": reason, "received_at": now.isoformat(), "tell_person_id": tell_person_id,
        "notice": notice})


def unread_notices(db: Database, job_id: int, person_id: int) -> list[dict]:
    """Refusals of this job that this person is to be told about and has not yet read."""
    return list(db.query(
        "select id, notice, received_at from refusals where job_id = ? and tell_person_id = ? "
        "and notice is not null and notice_read_at is null order by id", [job_id, person_id]))


def mark_notice_read(db: Database, refusal_id: int, job_id: int, person_id: int,
                     now: datetime) -> bool:
    """Mark a notice read by the person it is for; False when there is no such notice."""
    cursor = db.execute(
        "update refusals set notice_read_at = ? where id = ? and job_id = ? and "
        "tell_person_id = ? and notice_read_at is null",
        [now.isoformat(), refusal_id, job_id, person_id])
    return cursor.rowcount == 1


def refusals(db: Database, job_id: int) -> list[dict]:
    return list(db.table("refusals").rows_where("job_id = ?", [job_id], order_by="id"))
