"""A signature on a job's record: the signer's key unsealed by their PIN, the record printed
(or the revision's record as last signed) and signed, time-stamped, with the authority and
its revocation list embedded. `recording.record_event` is the one caller."""

from __future__ import annotations

import textwrap
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

from cryptography.hazmat.primitives import hashes
from cryptography.hazmat.primitives.serialization import Encoding

from .. import store
from ..domain.errors import RuleRefusal
from ..domain.execution import JobState
from ..records import identity
from ..records.identity import StationAuthority
from ..records.record_entries import station_time
from ..records.record_signatures import AUTHORISATION_KIND
from ..records.signing import StampBox, ValidationData
from ..store import signers
from ..store.people import Person
from .authority import current_revocation_list


@dataclass(frozen=True)
class UnlockedSigner:
    pyhanko_signer: Any
    manifestation: dict[str, Any]
    timestamper: Any = None   # the station's time-stamp unit, at the signing's instant
    validation: Any = None    # the CA and its revocation list now, for the record to embed


PIN_MAX_FAILURES = 5
STAMP_LINE_CHARACTERS = 72  # about what the 150 mm box holds at 9 pt DejaVu Sans
PIN_LOCK_MINUTES = 10


def unlock_signer(db: store.Database, person: Person, pin: str,
                   authority: StationAuthority | None, now: datetime) -> UnlockedSigner:
    """The person's signing key, unsealed by their PIN (the second component of a signature,
    21 CFR 11.200(a)). Only reads: the caller counts a wrong PIN (rule `wrong_pin`)."""
    if authority is None:
        raise RuleRefusal("no_station_authority", "This station has no certificate authority; "
                          "run `sparkward init` first.")
    enrolled = signers.signer(db, person.id)
    if enrolled is None or enrolled["revoked_at"]:
        raise RuleRefusal("no_signing_key", "You have no signing key on this station (or it "
                          "was revoked): ask an admin to enrol you with a PIN.")
    since = now - timedelta(minutes=PIN_LOCK_MINUTES)
    if signers.pin_failures_since(db, person.id, since) >= PIN_MAX_FAILURES:
        raise RuleRefusal("pin_throttled", f"Too many wrong PINs: wait {PIN_LOCK_MINUTES} "
                          "minutes before using your PIN again.")
    enrolment = identity.Enrolment(cert_pem=enrolled["cert_pem"],
                                   sealed=identity.SealedKey.from_json(enrolled["sealed_key"]))
    try:
        pyhanko_signer = identity.signer_for(enrolment, pin, authority.cert)
    except identity.WrongPin:
        raise RuleRefusal("wrong_pin", "That PIN does not unlock your signing key.") from None
    fingerprint = enrolment.certificate.fingerprint(hashes.SHA256()).hex()
    from ..records.timestamping import StationTimeStamper
    timestamper = (StationTimeStamper(authority.time_stamps, authority.cert, now)
                   if authority.time_stamps is not None else None)
    crl = current_revocation_list(db, authority, now)
    validation = ValidationData(authority.cert, (crl.public_bytes(Encoding.DER),), now)
    return UnlockedSigner(pyhanko_signer, {
        "signer_name": person.full_name, "authorisation": person.authorisation,
        "certificate_sha256": fingerprint}, timestamper, validation)


def signatures_of(state: JobState) -> list[dict[str, Any]]:
    """The job's signatures in the order given, as a record prints them (21 CFR 11.50)."""
    found = []
    for step in state.applicable:
        event = state.completed.get(step.id)
        if event is not None and event["kind"] == "signed":
            found.append({"step": step.id, "name": event["data"]["signer_name"],
                          "authorisation": event["data"].get("authorisation"),
                          "kind": event["data"].get("licence_kind"),
                          "meaning": event["data"]["meaning"],
                          "scope": event["data"].get("scope"),
                          "signed_at": event["received_at"],
                          "revision": 1 + sum(1 for e in (*state.returns, *state.amendments)
                                              if e["received_at"] < event["received_at"])})
    return found


@dataclass(frozen=True)
class PrintedRecord:
    """The PDF a signature goes on: a new print, or the revision's record as last signed."""

    head_hash: str                  # the job's latest event when it was looked at
    pdf: bytes
    boxes: dict[str, StampBox]      # empty signature fields to add (a new print only)
    revision: int
    signatures: int                 # how many it already carries
    supersedes: int | None
    reason: str | None = None       # why a new revision supersedes the last one


def record_revision(state: JobState) -> int:
    """A returned job's next signature, and each amendment, start a new record revision."""
    return len(state.returns) + len(state.amendments) + 1


def print_for_signing(db: store.Database, job_id: int, state: JobState, head_hash: str,
                       now: datetime) -> PrintedRecord:
    from ..records.pdf import render_for_signing

    revision = record_revision(state)
    latest = signers.latest_record(db, job_id)
    if latest is not None and latest["revision"] == revision:
        return PrintedRecord(head_hash, latest["pdf"], {}, revision, latest["signatures"],
                              latest["supersedes"])
    pdf, boxes = render_for_signing(db, job_id, now, signatures_of(state),
                                    record_revision=revision)
    return PrintedRecord(head_hash, pdf, boxes, revision, 0,
                          latest["id"] if latest else None,
                          _revision_reason(state) if latest else None)


def _revision_reason(state: JobState) -> str | None:
    """Why the record has a new revision: the latest return's reason or amendment's why."""
    causes = sorted([*state.returns, *state.amendments], key=lambda e: e["received_at"])
    if not causes:
        return None
    data = causes[-1]["data"]
    said = data.get("reason") or data.get("why")
    kind = "returned" if causes[-1]["kind"] == "returned" else "amended"
    return f"{kind}: {said}" if said else kind


def _stamp_text(data: dict[str, Any], at: datetime) -> str:
    """What a signature's visible stamp says (21 CFR 11.50: printed name, date and time,
    meaning), in lines short enough for the stamp box."""
    meaning = (f"Meaning: {data['meaning']} ({data['scope']})" if "scope" in data
               else f"Meaning: {data['meaning']}")
    licence = (f"Authorisation no. {data.get('authorisation') or 'none recorded'} "
               f"({data.get('licence_kind') or AUTHORISATION_KIND})")
    return "\n".join((
        f"Signed electronically by {data['signer_name']}",
        *textwrap.wrap(licence, STAMP_LINE_CHARACTERS),
        *textwrap.wrap(meaning, STAMP_LINE_CHARACTERS),
        f"Date and time: {station_time(at)}"))


def sign_job_record(db: store.Database, job_id: int, state: JobState, event: dict[str, Any],
                 signer: UnlockedSigner, printed: PrintedRecord, now: datetime) -> None:
    """Sign the job's PDF record: the first signature of a revision on a fresh print (which
    reserves the boxes of the signatures to come), later ones as incremental signatures in
    their boxes on the same file (earlier ones stay valid)."""
    from ..records.signing import sign_record

    if event["kind"] == "amendment":
        field_name = f"amendment-{len(state.amendments)}"
        meaning = f"Amended: {event['data']['what']} (because: {event['data']['why']})"
        stamp = _stamp_text({**event["data"], "meaning": meaning}, now)
    else:
        field_name = str(event["step_id"])
        meaning = f"{event['data']['meaning']} ({event['data']['scope']})"
        stamp = _stamp_text(event["data"], now)
    signed = sign_record(printed.pdf, signer.pyhanko_signer, field_name=field_name,
                         meaning=meaning, signer_name=event["data"]["signer_name"],
                         stamp=stamp, reserve=printed.boxes, signed_at=now,
                         timestamper=signer.timestamper, validation=signer.validation)
    signers.add_record(db, job_id=job_id, revision=printed.revision, pdf=signed,
                       chain_hash=event["hash"], signatures=printed.signatures + 1, now=now,
                       supersedes=printed.supersedes, reason=printed.reason)
