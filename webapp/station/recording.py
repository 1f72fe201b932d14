"""The one path a job's events take, for the htmx views and the JSON API alike.

Open a job, read its state, record an event: each read-then-write happens in
one BEGIN IMMEDIATE transaction, the domain decides, the store appends.
"""

from __future__ import annotations

import uuid
from dataclasses import dataclass
from datetime import datetime
from typing import Any, Literal

from .. import store
from ..domain import gates, placement
from ..domain.chain import GENESIS, event_digest
from ..domain.checks import Circumstances, check_event, job_progress, needs_engine_tags
from ..domain.errors import RuleRefusal
from ..domain.event_data import check_event_data, request_digest, same_entry
from ..domain.execution import apply_event, configuration_for
from ..domain.gates import Tag
from ..domain.procedure_files import procedure_of_revision
from ..domain.procedures import PartChange
from ..domain.readings import InputProblem
from ..records.identity import StationAuthority
from ..store import authorisations, engines, fleet, jobs, people, procedures, signers
from ..store import instruments as register
from ..store.job_states import Job, NotFound, load_job, remember
from ..store.people import Person
from .record_signing import (  # noqa: F401 - signatures_of, record_revision: part of the face
    PIN_LOCK_MINUTES,
    PIN_MAX_FAILURES,
    PrintedRecord,
    print_for_signing,
    record_revision,
    sign_job_record,
    signatures_of,
    unlock_signer,
)


@dataclass(frozen=True)
class Outcome:
    status: Literal["stored", "duplicate", "refused", "invalid"]
    event: dict[str, Any] | None = None
    refusal: RuleRefusal | None = None
    problem: InputProblem | None = None  # a value that cannot be a reading: nothing kept


def _chain(db: store.Database, *, job_id: int, event_id: str, kind: str, step_id: str | None,
           data: dict[str, Any], person_id: int, device_time: str | None, now: datetime,
           last: dict[str, Any] | None, device_sent: str | None = None) -> dict[str, Any]:
    """Append an event linked to `last` (the job's latest event, None for the first)."""
    record = {"id": event_id, "job_id": job_id, "seq": last["seq"] + 1 if last else 1,
              "step_id": step_id, "kind": kind, "data": data, "person_id": person_id,
              "device_time": device_time, "device_sent": device_sent,
              "received_at": now.isoformat(), "prev_hash": last["hash"] if last else GENESIS}
    record["hash"] = event_digest(record)
    jobs.append_event(db, record)
    return record


def open_job(db: store.Database, *, procedure_id: str, engine_id: int, channel: str | None,
             person: Person, now: datetime) -> int:
    """Open a job on an engine (and channel) with the approved revision of a procedure."""
    with store.writing(db):
        engine = fleet.engine(db, engine_id)
        if engine is None:
            raise NotFound(f"engine {engine_id} is not in the fleet")
        revision = procedures.approved_revision(db, procedure_id)
        if revision is None:
            raise NotFound(f"no approved procedure '{procedure_id}'")
        procedure = procedure_of_revision(revision["hash"], revision["content"])
        configuration = configuration_for(procedure, engine["model"],
                                          effectivity_parts(db, engine), channel)
        job_id = jobs.create_job(db, engine_id=engine_id, procedure_id=procedure_id,
                                 revision_hash=revision["hash"], channel=channel,
                                 opened_by=person.id, now=now)
        _chain(db, job_id=job_id, event_id=str(uuid.uuid4()), kind="job_opened", step_id=None,
               data={"procedure": procedure_id, "revision": revision["hash"],
                     "engine": engine_id, "engine_serial": engine["serial"],
                     **configuration.as_data()},
               person_id=person.id, device_time=None, now=now, last=None)
    return job_id


def record_event(db: store.Database, job_id: int, *, event_id: str, kind: str,
                 step_id: str | None, data: dict[str, Any], device_time: str | None,
                 person: Person, now: datetime,
                 authority: StationAuthority | None = None,
                 device_sent: str | None = None) -> Outcome:
    """Check an event against the rules and append it; the same UUID twice stores once.

    A signature (`signed`) carries the person's PIN in `data`; it is used to unseal their
    key and sign the PDF record, and is never stored. A tag's hand-over or a supervisor's
    authorisation for an absent owner carries the PIN too: it proves who consents (wrong
    PINs counted and throttled as for signatures); nothing is signed or printed for it.

    `device_sent` is the device's clock when it sent an entry that waited on it: with
    `device_time` it places the entry when it was made (domain/placement.py). It is not part
    of what makes two sendings the same entry (each sending has its own)."""
    problem = check_event_data(kind, data)
    if problem is not None:  # shape first: junk never reaches the rules or the log
        return Outcome("invalid", problem=problem)
    sent = dict(data)
    digest = request_digest(job_id, kind, step_id, sent, device_time)
    signing = kind in ("signed", "amendment")
    consenting = kind in gates.CONSENT_KINDS
    pin = str(data.pop("pin", "")) if signing or consenting else None
    if kind == "signed":
        data = {}
    signer, printed, pin_proved = None, None, False
    if (signing or consenting) and jobs.event(db, event_id) is None:
        # The PIN's key derivation (a third of a second) and printing the record (most of a
        # second) run before the job's log is locked for writing, so other tablets' entries
        # do not wait for them.
        try:
            signer = unlock_signer(db, person, pin or "", authority, now)
        except RuleRefusal as refusal:
            with store.writing(db):
                if refusal.rule == "wrong_pin":
                    signers.record_pin_failure(db, person.id, now)
                jobs.record_refusal(db, event_id=event_id, job_id=job_id, person_id=person.id,
                                    kind=kind, step_id=step_id, data=data, rule=refusal.rule,
                                    reason=refusal.reason, now=now)
            return Outcome("refused", refusal=refusal)
        if kind == "signed":
            printed = _print_ahead(db, job_id, step_id, dict(data), device_time, person, now)
        if consenting:
            signer, pin_proved = None, True
    with store.writing(db):
        existing = jobs.event(db, event_id)
        if existing is not None:
            kept_digest = jobs.request_digest(db, event_id)
            if (digest == kept_digest if kept_digest is not None else
                    _same_as_stored(db, existing, job_id, kind, step_id, sent, device_time)):
                return Outcome("duplicate", event=existing)
            reused = RuleRefusal("event_id_reused", "This event id was already used for a "
                                 "different entry; the device must make a new one.")
            return Outcome("refused", event=existing, refusal=reused)
        job = load_job(db, job_id)
        try:
            at = _circumstances(db, job, kind, step_id, data, device_time, person, now,
                                device_sent)
            data = dict(check_event(job.state, kind, step_id, data, at))
        except InputProblem as problem:
            return Outcome("invalid", problem=problem)
        except RuleRefusal as refusal:
            # One recorded first (another tablet's step or tag) is told on their job page.
            first = refusal.details.get("first_person_id")
            jobs.record_refusal(db, event_id=event_id, job_id=job_id, person_id=person.id,
                                kind=kind, step_id=step_id, data=data, rule=refusal.rule,
                                reason=refusal.reason, now=now,
                                tell_person_id=first if isinstance(first, int) else None,
                                notice=str(refusal.details.get("notice") or "") or None)
            return Outcome("refused", refusal=refusal)
        if pin_proved:
            signers.clear_pin_failures(db, person.id)
        if signer is not None:
            signers.clear_pin_failures(db, person.id)
            # The rule's authorisation (licence number and kind) wins over the person's
            # staff number, which an amendment prints.
            data = {**signer.manifestation, **data}
            if printed is None or printed.head_hash != job.head["hash"]:
                printed = None  # someone wrote in between: print again, now under the lock
        record = _chain(db, job_id=job_id, event_id=event_id, kind=kind, step_id=step_id,
                        data=data, person_id=person.id, device_time=device_time, now=now,
                        last=job.head, device_sent=device_sent)
        jobs.remember_request(db, event_id, digest)
        after = apply_event(job.state, record)
        if at.engine is not None:
            engines.record_event_effects(db, job.row["engine_id"], at.engine, record)
        if signer is not None:
            if printed is None:
                # An amendment's record prints the amendment itself, so it is printed here.
                printed = print_for_signing(db, job_id, job.state if kind == "signed"
                                             else after, job.head["hash"], now)
            sign_job_record(db, job_id, after, record, signer, printed, now)
        progress = job_progress(after)
        if (after.status, progress) != (job.row["status"], job.row.get("progress")):
            jobs.set_job_status(db, job_id, after.status, progress)
    remember(record["hash"], after)  # only once committed
    return Outcome("stored", event=record)


def notice_read(db: store.Database, job_id: int, refusal_id: int, person: Person,
                now: datetime) -> bool:
    """The person told of a refused entry (theirs was recorded first) has read the notice;
    False when no unread notice of that id is theirs on this job."""
    with store.writing(db):
        return jobs.mark_notice_read(db, refusal_id, job_id, person.id, now)


def _same_as_stored(db: store.Database, existing: dict[str, Any], job_id: int, kind: str,
                    step_id: str | None, sent: dict[str, Any], device_time: str | None) -> bool:
    """For an event stored before request digests were kept: it is the stored one when job,
    kind, step, device time and every field the station kept agree."""
    if (existing["job_id"], existing["kind"], existing["step_id"], existing["device_time"]) != (
            job_id, kind, step_id, device_time):
        return False
    if kind in gates.CONSENT_KINDS:
        _named_person(db, sent)  # kept as the person's id, as it was when stored
    return same_entry(kind, sent, existing["data"])


def _circumstances(db: store.Database, job: Job, kind: str, step_id: str | None,
                   data: dict[str, Any], device_time: str | None, person: Person,
                   now: datetime, device_sent: str | None = None) -> Circumstances:
    """What the rules need to know beyond the job's own log (the engine's state and tags, who
    is who); the engine's state is read once, from its kept value. `made` is when the work
    was done, placed by the tablet's count for an entry that waited on it."""
    on_engine = _engine_circumstances(db, job, kind, step_id, data)
    tags = (dict(on_engine["engine"].tags)
            if needs_engine_tags(job.state, kind, step_id) else {})
    roles_of = _named_person(db, data) if kind in gates.CONSENT_KINDS else {}
    # Names a refusal may give: the tags' owners and hangers, who did the job's steps, and
    # the person (a late entry names who recorded first, and tells them who was refused).
    named = {person.id, *(t.owner_id for t in tags.values()),
             *(t.applied_by for t in tags.values()),
             *(s.event["person_id"] for s in job.state.steps if s.event)}
    device_now = _device_time(device_time)
    made = placement.made_at(now, device_now, _device_time(device_sent))
    return Circumstances(now=now, made=made, counted=made != now, device_now=device_now,
                         person_id=person.id,
                         job_id=job.row["id"], tags=tags, names=people.names_by_id(db, named),
                         roles=person.roles, roles_of=roles_of,
                         authorisations=(tuple(authorisations.held_by(db, person.id))
                                         if kind == "signed" else ()),
                         **on_engine)


def _engine_circumstances(db: store.Database, job: Job, kind: str, step_id: str | None,
                          data: dict[str, Any]) -> dict[str, Any]:
    """The engine's kept state (every event may change it), and for a part step what the
    position may take and where the named serial is now."""
    engine_id = job.row["engine_id"]
    found: dict[str, Any] = {"engine": engines.current(db, engine_id)}
    target = job.state.step(step_id) if step_id and kind == "part_recorded" else None
    if target is not None and isinstance(target.step, PartChange):
        found["allowed_parts"] = tuple(engines.allowed_parts(db, engine_id))
        serial = data.get("serial")
        if isinstance(serial, str) and serial.strip():
            found["whereabouts"] = engines.whereabouts(db, target.step.part, serial.strip())
    named = data.get("instrument_id")
    if kind in ("reading_recorded", "sparks_counted") and isinstance(named, str) \
            and named.strip():
        found["instrument"] = register.instrument(db, named.strip())
    return found


def _print_ahead(db: store.Database, job_id: int, step_id: str | None, data: dict[str, Any],
                 device_time: str | None, person: Person, now: datetime
                 ) -> PrintedRecord | None:
    """The record a signature will go on, printed before the write lock; None when the rules
    would refuse the signature now (the locked path then refuses and records why)."""
    job = load_job(db, job_id)
    try:
        check_event(job.state, "signed", step_id, data,
                    _circumstances(db, job, "signed", step_id, data, device_time, person, now))
    except (RuleRefusal, InputProblem):
        return None
    return print_for_signing(db, job_id, job.state, job.head["hash"], now)


def engine_tags(db: store.Database, engine_id: int) -> dict[str, Tag]:
    """The lockout tags hanging on an engine's breakers now, from all its jobs."""
    return dict(engines.current(db, engine_id).tags)


def _device_time(text: str | None) -> datetime | None:
    return datetime.fromisoformat(text) if text else None


def _named_person(db: store.Database, data: dict[str, Any]) -> dict[int, tuple[str, ...]]:
    """The person a tag's hand-over names in `to` (a username or a person id), written into
    `data` as their id, with their roles; nobody when no active person has that name."""
    to = data.get("to")
    found = (people.person_by_username(db, to.strip()) if isinstance(to, str)
             else people.person_by_id(db, to) if isinstance(to, int) and not isinstance(to, bool)
             else None)
    if found is None or not found.active:
        return {}
    data["to"] = found.id
    return {found.id: found.roles}


def effectivity_parts(db: store.Database, engine: dict[str, Any]) -> list[dict[str, Any]]:
    """The parts a procedure's effectivity is checked against: those fitted, and for a
    position left empty (an exciter off for repair), the part numbers it may take."""
    fitted = list(engine["components"])
    held = {(c["kind"], c["channel"]) for c in fitted}
    for allowed in engines.allowed_parts(db, engine["id"]):
        for channel in ([allowed.channel] if allowed.channel else ["A", "B"]):
            if (allowed.kind, channel) not in held:
                fitted.append({"id": None, "kind": allowed.kind, "channel": channel,
                               "type": allowed.type, "part_number": None, "serial": None})
    return fitted


@dataclass(frozen=True)
class Openable:
    """A procedure that may be opened on an engine, for one channel or for both."""

    procedure_id: str
    title: str
    kind: str
    ata: str
    channel: str | None


def openable_procedures(db: store.Database, engine: dict[str, Any]) -> list[Openable]:
    """The approved procedures whose effectivity fits this engine, per channel choice."""
    found = []
    parts = effectivity_parts(db, engine)
    for revision in procedures.approved_revisions(db):
        procedure = procedure_of_revision(revision["hash"], revision["content"])
        choices: list[str | None] = ["A", "B"] if procedure.channel == "one" else [None]
        for channel in choices:
            try:
                configuration_for(procedure, engine["model"], parts, channel)
            except RuleRefusal:
                continue
            found.append(Openable(procedure.id, procedure.title, procedure.kind,
                                  procedure.ata, channel))
    return found
