"""Named schema migrations, applied in order at start-up and recorded in the database."""

from __future__ import annotations

from sqlite_utils import Database
from sqlite_utils.migrations import Migrations

MIGRATIONS = Migrations("sparkward")


@MIGRATIONS(name="0001_people_fleet_procedures_jobs_events")
def initial(db: Database) -> None:
    db.table("settings").create({"key": str, "value": str}, pk="key")
    db.table("people").create({
        "id": int, "username": str, "full_name": str, "roles": str,
        "authorisation": str, "password_hash": str, "active": int, "created_at": str,
    }, pk="id", not_null={"username", "full_name", "roles", "password_hash", "active"})
    db.table("people").create_index(["username"], unique=True)
    db.table("login_failures").create({"id": int, "username": str, "at": str}, pk="id")
    db.table("login_failures").create_index(["username", "at"])

    db.table("aircraft").create({"id": int, "registration": str, "model": str, "operator": str},
                          pk="id", not_null={"registration", "model"})
    db.table("aircraft").create_index(["registration"], unique=True)
    db.table("engines").create({"id": int, "aircraft_id": int, "position": int, "model": str,
                          "serial": str}, pk="id", foreign_keys=[("aircraft_id", "aircraft")],
                         not_null={"model", "serial"})
    db.table("engines").create_index(["serial"], unique=True)
    db.table("engines").create_index(["aircraft_id", "position"], unique=True)
    db.table("components").create({
        "id": int, "kind": str, "part_number": str, "serial": str, "type": str,
        "engine_id": int, "channel": str,
    }, pk="id", foreign_keys=[("engine_id", "engines")],
        not_null={"kind", "part_number", "serial", "type"})
    db.table("components").create_index(["part_number", "serial"], unique=True)
    db.table("plug_wear_history").create({
        "id": int, "component_id": int, "engine_id": int, "channel": str, "measured_on": str,
        "erosion_mm": float, "engine_hours": float, "starts": int,
        "continuous_ignition_hours": float, "continuous_ignition_estimated": int,
        "source": str,
    }, pk="id", foreign_keys=[("component_id", "components"), ("engine_id", "engines")])

    db.table("procedures").create({"id": str, "title": str}, pk="id")
    db.table("procedure_revisions").create({
        "hash": str, "procedure_id": str, "number": int, "content": str, "status": str,
        "source_file": str, "created_at": str,
    }, pk="hash", foreign_keys=[("procedure_id", "procedures")],
        not_null={"procedure_id", "number", "content", "status"})
    db.table("procedure_revisions").create_index(["procedure_id", "number"], unique=True)

    db.table("jobs").create({
        "id": int, "engine_id": int, "procedure_id": str, "revision_hash": str, "channel": str,
        "status": str, "opened_by": int, "opened_at": str,
    }, pk="id", foreign_keys=[("engine_id", "engines"), ("procedure_id", "procedures"),
                              ("revision_hash", "procedure_revisions"), ("opened_by", "people")],
        not_null={"engine_id", "procedure_id", "revision_hash", "status", "opened_by"})
    db.table("jobs").create_index(["status"])

    db.table("events").create({
        "id": str, "job_id": int, "seq": int, "step_id": str, "kind": str, "data": str,
        "person_id": int, "device_time": str, "received_at": str, "prev_hash": str,
        "hash": str,
    }, pk="id", foreign_keys=[("job_id", "jobs"), ("person_id", "people")],
        not_null={"job_id", "seq", "kind", "data", "person_id", "received_at", "prev_hash",
                  "hash"})
    db.table("events").create_index(["job_id", "seq"], unique=True)
    # The log is append-only: the database itself refuses edits and deletions.
    db.execute("""CREATE TRIGGER events_no_update BEFORE UPDATE ON events
                  BEGIN SELECT RAISE(ABORT, 'events are append-only'); END""")
    db.execute("""CREATE TRIGGER events_no_delete BEFORE DELETE ON events
                  BEGIN SELECT RAISE(ABORT, 'events are append-only'); END""")

    db.table("refusals").create({
        "id": int, "event_id": str, "job_id": int, "person_id": int, "kind": str,
        "step_id": str, "data": str, "rule": str, "reason": str, "received_at": str,
    }, pk="id")
    db.table("refusals").create_index(["job_id"])


@MIGRATIONS(name="0002_index_events_by_kind")
def events_by_kind(db: Database) -> None:
    # The tags hanging on an engine are read from its jobs' tag events on every gate check.
    db.table("events").create_index(["kind", "job_id"])


@MIGRATIONS(name="0003_signers_and_records")
def signers_and_records(db: Database) -> None:
    # A person's certificate and their signing key sealed under their PIN (never the PIN).
    db.table("signers").create({"person_id": int, "cert_pem": str, "sealed_key": str,
                                "enrolled_at": str, "revoked_at": str}, pk="person_id",
                               foreign_keys=[("person_id", "people")],
                               not_null={"cert_pem", "sealed_key", "enrolled_at"})
    db.table("pin_failures").create({"id": int, "person_id": int, "at": str}, pk="id")
    db.table("pin_failures").create_index(["person_id", "at"])
    # Each signed state of a job's PDF record; an amendment makes a new revision that names
    # the one it supersedes. Rows are never updated in place.
    db.table("records").create({
        "id": int, "job_id": int, "revision": int, "pdf": bytes, "chain_hash": str,
        "signatures": int, "created_at": str, "supersedes": int, "reason": str,
    }, pk="id", foreign_keys=[("job_id", "jobs")],
        not_null={"job_id", "revision", "pdf", "chain_hash", "signatures", "created_at"})
    db.table("records").create_index(["job_id", "revision", "signatures"], unique=True)


@MIGRATIONS(name="0004_engine_state_and_parts")
def engine_state_and_parts(db: Database) -> None:
    # The fleet's starting configuration: what was fitted where before the station's first
    # job. The engine's state folds every later event over it; `components.engine_id` and
    # `components.channel` are then the derived current position, written only by that fold.
    db.table("installed_at_start").create({
        "engine_id": int, "kind": str, "channel": str, "component_id": int,
    }, pk=("engine_id", "kind", "channel"),
        foreign_keys=[("engine_id", "engines"), ("component_id", "components")])
    db.execute("insert into installed_at_start (engine_id, kind, channel, component_id) "
               "select engine_id, kind, channel, id from components where engine_id is not null")
    # The part numbers each position of an engine may take: approved ones and the
    # interchangeable alternates the fleet configuration lists (channel null: either channel).
    db.table("allowed_parts").create({
        "id": int, "engine_id": int, "kind": str, "channel": str, "part_number": str,
        "type": str, "interchangeability": str,
    }, pk="id", foreign_keys=[("engine_id", "engines")],
        not_null={"engine_id", "kind", "part_number", "type", "interchangeability"})
    db.table("allowed_parts").create_index(["engine_id", "kind"])
    db.execute("insert into allowed_parts (engine_id, kind, channel, part_number, type, "
               "interchangeability) select distinct engine_id, kind, channel, part_number, "
               "type, 'approved' from components where engine_id is not null")
    # The engine's state as of its latest event (a cache of the fold, kept in the same
    # transaction as each event; a test checks it equals a full replay).
    db.table("engine_state").create({"engine_id": int, "state": str, "event_rowid": int},
                                    pk="engine_id", foreign_keys=[("engine_id", "engines")],
                                    not_null={"state", "event_rowid"})
    # Each time a serial was fitted to and removed from a position (derived, like the above).
    db.table("part_moves").create({
        "id": int, "component_id": int, "engine_id": int, "kind": str, "channel": str,
        "fitted_job": int, "fitted_at": str, "fitted_usage": str,
        "removed_job": int, "removed_at": str, "removed_usage": str, "status": str,
        "reason": str, "tag": str,
    }, pk="id", foreign_keys=[("component_id", "components"), ("engine_id", "engines")],
        not_null={"component_id", "engine_id", "kind"})
    db.table("part_moves").create_index(["component_id"])
    db.table("events").create_index(["job_id", "kind"])


@MIGRATIONS(name="0005_authorisations")
def authorisations(db: Database) -> None:
    # What each person may sign: the kinds of signature (perform, inspect, certify), the
    # scope (ATA sections such as 74-10, the chapter 74, or procedure kinds), the licence or
    # certificate it rests on, and until when. Rows are never deleted: revoking sets
    # revoked_at, so a record signed under an authorisation can always name it.
    db.table("authorisations").create({
        "id": int, "person_id": int, "signatures": str, "scope": str, "licence_kind": str,
        "licence_number": str, "expires_on": str, "granted_by": int, "granted_at": str,
        "revoked_at": str,
    }, pk="id", foreign_keys=[("person_id", "people")],
        not_null={"person_id", "signatures", "scope", "licence_kind", "licence_number",
                  "expires_on", "granted_at"})
    db.table("authorisations").create_index(["person_id"])


@MIGRATIONS(name="0006_job_progress")
def job_progress(db: Database) -> None:
    # Where each job stands in the words of the job list (in work, returned, waiting for
    # inspection, waiting for certification, released, closed, not released): derived from
    # the job's events by the domain and written with the event that changes it.
    db.table("jobs").add_column("progress", str)
    db.execute("update jobs set progress = case status when 'open' then 'in work' "
               "else 'closed' end")


@MIGRATIONS(name="0007_usage_at_start")
def usage_at_start(db: Database) -> None:
    # The engine's totals (engine hours, starts, continuous-ignition hours, JSON) when a part
    # of the starting configuration was fitted, where the fleet's records give them: a
    # plug's usage since fitted is reckoned from them until a job fits another.
    db.table("installed_at_start").add_column("fitted_usage", str)


@MIGRATIONS(name="0008_instrument_register")
def instrument_register(db: Database) -> None:
    # The register of calibrated instruments, kept as a log: every entry (added, calibrated,
    # quarantined, withdrawn, corrected) is a new row with the instrument's whole state, who
    # made it and when; an instrument's latest row is what it is now. Nothing is edited.
    db.table("instrument_entries").create({
        "id": int, "instrument_id": str, "kind": str, "range_low": float, "range_high": float,
        "range_unit": str, "calibration_due": str, "status": str, "change": str,
        "changed_by": int, "changed_at": str,
    }, pk="id", not_null={"instrument_id", "kind", "range_low", "range_high", "range_unit",
                          "calibration_due", "status", "change", "changed_at"})
    db.table("instrument_entries").create_index(["instrument_id", "id"])


@MIGRATIONS(name="0009_sessions_and_login_throttle")
def sessions_and_login_throttle(db: Database) -> None:
    # Log-in sessions kept on the station: the browser's cookie carries a random token, the
    # station only its SHA-256 (a copy of the database cannot be used to log in). A session
    # ends by log-out, by its limits or by an admin; rows stay, with why they ended.
    db.table("sessions").create({
        "token_hash": str, "person_id": int, "created_at": str, "last_seen_at": str,
        "ended_at": str, "ended_why": str, "client_address": str, "user_agent": str,
    }, pk="token_hash", foreign_keys=[("person_id", "people")],
        not_null={"person_id", "created_at", "last_seen_at"})
    db.table("sessions").create_index(["person_id", "ended_at"])
    db.table("sessions").create_index(["person_id", "client_address"])
    # Failed log-ins are counted per name, per address and per both; a success or an admin
    # clears them by marking the rows (kept as the log of failed attempts).
    failures = db.table("login_failures")
    failures.add_column("address", str)
    failures.add_column("cleared_at", str)
    failures.add_column("cleared_why", str)
    failures.create_index(["address", "at"])
    failures.create_index(["username", "address", "at"])


@MIGRATIONS(name="0010_event_requests")
def event_requests(db: Database) -> None:
    # What the device sent for each stored event, as a SHA-256 of its canonical JSON (PIN
    # left out): a resent id is the same entry only when this matches; the stored data alone
    # cannot tell, since the station keeps what it derived, not every field sent.
    db.table("event_requests").create({"event_id": str, "digest": str}, pk="event_id",
                                      not_null={"digest"})


@MIGRATIONS(name="0011_refusal_notices")
def refusal_notices(db: Database) -> None:
    # An entry refused because someone else had recorded it first (another tablet's step or
    # tag) tells that person on their job page: whom to tell, the words, and when they read
    # it (the row stays as the log of the refusal).
    refusals = db.table("refusals")
    refusals.add_column("tell_person_id", int)
    refusals.add_column("notice", str)
    refusals.add_column("notice_read_at", str)
    refusals.create_index(["tell_person_id", "job_id"])


@MIGRATIONS(name="0012_device_sent")
def device_sent(db: Database) -> None:
    # For an entry that waited on a tablet: the tablet's clock when it sent the entry. With
    # `device_time` (its clock when the entry was made) it gives how long the entry waited,
    # by the tablet's count (domain/placement.py); chained when present (domain/chain.py).
    db.table("events").add_column("device_sent", str)
