"""Checking a work record: its PDF signatures, and its event chain against the station's log.

Used by `sparkward verify FILE.pdf` and the verify page. A record is good only when every
signature is intact, valid and trusted by this station's CA, nothing was changed after
the last one, and the job's event chain in the database still holds up to the entry
the record was printed from.
"""

from __future__ import annotations

import io
import logging
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime
from typing import Any

from cryptography import x509
from cryptography.hazmat.primitives import hashes

from ..domain.chain import first_broken_link
from .signing import (
    RecordUnreadable,
    SignatureReport,
    empty_signature_fields,
    signed_fields,
    verify_record,
)

# pyHanko (0.38 and later) logs a change it finds after a signature as a warning with its
# traceback; the check's own report says the same in words (the signature does not cover
# the change), so that log is kept to errors: a person running `sparkward verify` sees the
# verdict, not a stack.
logging.getLogger("pyhanko.sign.diff_analysis").setLevel(logging.ERROR)

_RECORD_ID = re.compile(r"SW-(\d{5})-(\d{3})-([0-9A-F]{8})")


@dataclass(frozen=True)
class RecordCheck:
    signatures: list[SignatureReport]
    record_id: str | None
    job_id: int | None
    chain_ok: bool | None          # None: the record names no job this station knows
    chain_message: str
    problems: list[str] = field(default_factory=list)
    unsigned: list[str] = field(default_factory=list)  # signature boxes still empty
    notes: list[str] = field(default_factory=list)     # worth knowing, not failures
    # Where the file stands among the record's states the station kept: "latest",
    # "superseded", "incomplete" (an earlier state of its revision, or cut back), "unknown".
    standing: str = "unknown"
    standing_message: str = ""
    revision: int | None = None

    @property
    def intact(self) -> bool:
        return not self.problems

    @property
    def ok(self) -> bool:
        """Intact, trusted and the latest state of the record: only this "checks out"."""
        return self.intact and self.standing == "latest"

    @property
    def exit_code(self) -> int:
        """0 intact and latest; 1 intact but superseded or incomplete; 2 altered or
        untrusted (or not a file the station issued)."""
        return 0 if self.ok else 1 if self.intact else 2


def record_id_of(pdf: bytes) -> str | None:
    """The record id printed in the PDF's title (WeasyPrint writes <title> into /Info)."""
    from pyhanko.pdf_utils.reader import PdfFileReader

    try:
        info = PdfFileReader(io.BytesIO(pdf)).trailer_view.get("/Info")
        title = str(info.get_object().get("/Title", "")) if info is not None else ""
    except Exception:
        return None
    found = _RECORD_ID.search(title)
    return found.group(0) if found else None


def revocations(revoked_rows: Iterable[Mapping[str, Any]]) -> dict[str, datetime]:
    """Revocation times by certificate SHA-256, from the station's revoked signer rows."""
    found = {}
    for row in revoked_rows:
        cert = x509.load_pem_x509_certificate(str(row["cert_pem"]).encode())
        at = datetime.fromisoformat(str(row["revoked_at"]))
        found[cert.fingerprint(hashes.SHA256()).hex()] = (
            at.replace(tzinfo=UTC) if at.tzinfo is None else at)
    return found


def _revocation_notes(reports: list[SignatureReport], revoked: Mapping[str, datetime]
                      ) -> tuple[list[str], list[str]]:
    """(problems, notes): a signature dated after its signer's access ended is a problem (the
    station would have refused it); one made before stays valid, and is noted."""
    problems, notes = [], []
    for r in reports:
        ended = revoked.get(r.certificate_sha256)
        if ended is None:
            continue
        when = ended.isoformat(timespec="seconds")
        # A verified time-stamp says when the signature existed; without one, the signer's
        # own claim is all there is.
        made = r.time_stamped_at if r.time_stamp_ok else r.signed_at
        if made is None or made >= ended:
            problems.append(f"signature '{r.field_name}' is dated after {r.signer}'s signing "
                            f"access was revoked ({when}): this station did not make it")
        else:
            notes.append(f"{r.signer}'s signing access was revoked at {when}, after the "
                         f"signature '{r.field_name}': that signature stays valid")
    return problems, notes


def check_record(pdf: bytes, trust_root: x509.Certificate, events_of_job: Any,
                 states_of_job: Any, revoked: Mapping[str, datetime] | None = None
                 ) -> RecordCheck:
    """`events_of_job(job_id)` gives the job's events from the station's database (or None);
    `revoked` the station's revocation times by certificate SHA-256 (see `revocations`);
    `states_of_job(job_id)` the record's signed states the station kept (store.signers
    .stored_states), to say whether the file is the latest one."""
    try:
        reports = verify_record(pdf, trust_root)
        unsigned = empty_signature_fields(pdf)
    except RecordUnreadable as err:
        return RecordCheck([], None, None, None, "", [str(err)])
    check = _check_chain(pdf, reports, events_of_job)
    late, notes = _revocation_notes(reports, revoked or {})
    check = replace(check, problems=check.problems + late, unsigned=unsigned, notes=notes)
    if check.job_id is not None:
        check = _with_standing(check, pdf, list(states_of_job(check.job_id) or []))
    return check


def _with_standing(check: RecordCheck, pdf: bytes, states: list[Mapping[str, Any]]
                   ) -> RecordCheck:
    """Which kept state the file is (byte for byte), or which it was cut back from."""
    if not states:
        problem = f"the station keeps no signed record of job {check.job_id}"
        return replace(check, problems=[*check.problems, problem], standing_message=problem)
    exact = [s for s in states if bytes(s["pdf"]) == pdf]
    cut = [s for s in states if len(s["pdf"]) > len(pdf) and bytes(s["pdf"]).startswith(pdf)]
    if not exact and not cut:
        problem = ("no state of this record the station kept matches the file byte for byte: "
                   "it is not a copy the station handed out")
        return replace(check, problems=[*check.problems, problem], standing_message=problem)
    state = exact[-1] if exact else cut[0]
    revision = int(state["revision"])
    newest = max(int(s["revision"]) for s in states)
    last_of_revision = [s for s in states if int(s["revision"]) == revision][-1]
    said: list[str] = []
    standing = "latest"
    if not exact or last_of_revision is not state:
        beyond = [f for f in signed_fields(bytes(last_of_revision["pdf"]))
                  if f not in signed_fields(pdf)]
        how = "cut back at an earlier end of file" if not exact else "an earlier state"
        said.append(f"incomplete: {how} of revision {revision}; the station holds "
                    + (f"signatures beyond it: {', '.join(beyond)}" if beyond
                       else "a later state of it"))
        standing = "incomplete"
    if newest > revision:
        later = next(s for s in states if int(s["revision"]) == newest)
        said.append(f"superseded by revision {newest} (record "
                    f"{record_id_of(bytes(later['pdf'])) or 'id unknown'}, "
                    f"{str(later['created_at'])[:16].replace('T', ' ')} UTC"
                    + (f", reason: {later['reason']}" if later["reason"] else "") + ")")
        standing = "superseded"
    message = "; ".join(said) or f"the latest state of revision {revision}, as kept"
    return replace(check, standing=standing, standing_message=message, revision=revision)


def _check_chain(pdf: bytes, reports: list[SignatureReport],
                 events_of_job: Any) -> RecordCheck:
    problems = [f"signature '{r.field_name}': {r.summary}" for r in reports if not r.good]
    if not reports:
        problems.append("the file carries no signature")
    record_id = record_id_of(pdf)
    if record_id is None:
        return RecordCheck(reports, None, None, None, "the file names no Sparkward record",
                           problems + ["the file names no Sparkward record"])
    match = _RECORD_ID.fullmatch(record_id)
    assert match is not None
    job_id, seq, prefix = int(match.group(1)), int(match.group(2)), match.group(3)
    events = events_of_job(job_id)
    if not events:
        message = f"job {job_id} is not in this station's database"
        return RecordCheck(reports, record_id, job_id, None, message, problems + [message])
    broken = first_broken_link(events)
    printed = next((e for e in events if e["seq"] == seq), None)
    if broken is not None:
        message = f"the job's event chain no longer holds from entry {broken}: the log was " \
                  "changed after it was written"
        chain_ok = False
    elif printed is None or not printed["hash"].upper().startswith(prefix):
        message = f"entry {seq} of job {job_id} is not the one the record was printed from"
        chain_ok = False
    else:
        message = f"the event chain of job {job_id} holds ({len(events)} entries); the record " \
                  f"was printed from entry {seq}"
        chain_ok = True
    if not chain_ok:
        problems.append(message)
    return RecordCheck(reports, record_id, job_id, chain_ok, message, problems)
