"""Signing work-record PDFs and verifying them (PAdES B-B with pyHanko).

Why real PDF signatures: the signature is bound to the exact bytes of the record, so
it cannot be excised, copied or moved to another record by ordinary means (21 CFR
11.70), and any reader can check it without Sparkward. Each signature carries the
signer's printed name and its meaning as /Name and /Reason (21 CFR 11.50).

Why visible stamps: a record is printed and filed, and a later signer's signature must
show on paper too (21 CFR 11.50). The record reserves a box for each signature still to
come; the first signature of a revision adds an empty signature field over every box in
the same update, and each signer's signature fills its own field with a stamp giving the
printed name, authorisation, meaning and time. Filling a reserved field is form filling,
so earlier signatures stay valid.

Why a worker thread: pyHanko's sync API calls ``asyncio.run()``, which fails when an
event loop already runs in the calling thread (pytest-playwright, some servers). Every
pyHanko call here goes through one module-level worker thread, which also keeps a web
request's thread free of pyHanko's event loop.
"""

from __future__ import annotations

import hashlib
import io
import logging
from collections.abc import Callable, Iterable, Mapping
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace
from datetime import datetime
from typing import Any, TypeVar

from asn1crypto import x509 as asn1_x509
from cryptography import x509 as crypto_x509
from cryptography.hazmat.primitives.serialization import Encoding
from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
from pyhanko.pdf_utils.misc import PdfError
from pyhanko.pdf_utils.reader import PdfFileReader
from pyhanko.sign import fields, signers
from pyhanko.sign.diff_analysis import ModificationLevel
from pyhanko.sign.timestamps.api import TimeStamper
from pyhanko.sign.validation import validate_pdf_signature, validate_pdf_timestamp
from pyhanko.sign.validation.pdf_embedded import EmbeddedPdfSignature
from pyhanko.sign.validation.status import SignatureCoverageLevel
from pyhanko_certvalidator import ValidationContext

from .stamp_style import stamp_style

T = TypeVar("T")

_EXECUTOR = ThreadPoolExecutor(max_workers=1, thread_name_prefix="sparkward-pyhanko")
# The station embeds the validation data it holds (its own CA and list) and never fetches
# on purpose; pyHanko's warning about that at every signature is no news in the log.
logging.getLogger("pyhanko.sign.signers.pdf_signer").addFilter(
    lambda record: "fetching is not allowed" not in record.getMessage())

# Subject attributes that may carry the person's identity; asn1crypto's native names
# mapped to the short names the rest of the station uses.
_SUBJECT_KEYS = {"common_name": "CN", "pseudonym": "pseudonym",
                 "serial_number": "serialNumber", "organizational_unit_name": "OU",
                 "user_id": "UID"}
# Later changes that do not count as modifying a signed record: another signature
# (FORM_FILLING) or signature-archival updates (LTA_UPDATES).
_ACCEPTABLE = {ModificationLevel.NONE, ModificationLevel.LTA_UPDATES,
               ModificationLevel.FORM_FILLING}
_COVERAGE = {SignatureCoverageLevel.ENTIRE_FILE: "entire file",
             SignatureCoverageLevel.ENTIRE_REVISION: "entire revision"}


@dataclass(frozen=True)
class ValidationData:
    """What a record embeds for long-term validation: the trust root and the station's
    revocation lists (DER), current at signing."""

    authority: crypto_x509.Certificate
    revocation_lists: tuple[bytes, ...]
    at: datetime   # the station's clock at signing: the lists are current then


class RecordUnreadable(ValueError):
    """The bytes are not a PDF that can be parsed; nothing can be said about signatures."""


@dataclass(frozen=True)
class StampBox:
    """Where a signature's stamp goes: a page (0-based) and a rectangle in PDF points
    (x1, y1, x2, y2, origin at the page's bottom left)."""

    page: int
    rect: tuple[float, float, float, float]


@dataclass(frozen=True)
class SignatureReport:
    """What one signature in a record proves, in terms a certifying inspector can read."""

    field_name: str
    signer: str
    authorisation: str | None
    subject: dict[str, str]
    meaning: str
    signed_at: datetime | None
    intact: bool
    valid: bool
    trusted: bool
    coverage: str
    modified_after: bool
    summary: str
    certificate_sha256: str = ""  # of the signer's certificate (DER), to look the signer up
    # The RFC 3161 signature time-stamp: its time, and whether its token is intact, valid and
    # trusted (None: the signature carries none, so its time is the signer's word only).
    time_stamped_at: datetime | None = None
    time_stamp_ok: bool | None = None

    @property
    def good(self) -> bool:
        return (self.intact and self.valid and self.trusted and not self.modified_after
                and self.time_stamp_ok is not False)


def _off_thread(fn: Callable[..., T], *args: Any) -> T:
    """Run ``fn`` in the pyHanko worker thread and wait for it (exceptions propagate)."""
    return _EXECUTOR.submit(fn, *args).result()


class _StationClockSigner(signers.PdfSigner):
    """A PdfSigner whose signing time is the station's clock, the one every event of the
    job carries, rather than the process's wall clock."""

    def __init__(self, *args: Any, signing_time: datetime | None, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self._signing_time = signing_time

    def init_signing_session(self, *args: Any, **kwargs: Any) -> Any:
        session = super().init_signing_session(*args, **kwargs)
        if self._signing_time is not None:
            session.system_time = self._signing_time
        return session


def _sign(pdf: bytes, signer: signers.Signer, field_name: str, meaning: str,
          signer_name: str, location: str | None, stamp: str | None,
          reserve: Mapping[str, StampBox], signed_at: datetime | None = None,
          timestamper: TimeStamper | None = None,
          validation: ValidationData | None = None) -> bytes:
    try:
        writer = IncrementalPdfFileWriter(io.BytesIO(pdf))
        # name -> the signature in it, None for an empty (reserved) field
        existing = {name: value for name, value, _ in fields.enumerate_sig_fields(writer)}
    except (PdfError, ValueError) as exc:
        raise RecordUnreadable(f"The record could not be read as a PDF: {exc}") from exc
    if existing.get(field_name) is not None:
        raise ValueError(f"The record is already signed in the field {field_name!r}.")
    order = list(reserve)
    for position, (name, box) in enumerate(reserve.items()):
        if name in existing:
            raise ValueError(f"The record already has a signature field named {name!r}.")
        # Signing a box locks it and every box before it in the record's order: what a
        # signature vouches for cannot be re-signed or cleared under it.
        lock = fields.FieldMDPSpec(fields.FieldMDPAction.INCLUDE, order[:position + 1])
        fields.append_signature_field(writer, fields.SigFieldSpec(
            sig_field_name=name, on_page=box.page, box=box.rect,  # type: ignore[arg-type]
            field_mdp_spec=lock))
    # The revision's first signature certifies it (ISO 32000-1 12.8.2.2, DocMDP): from then on
    # only filling the reserved signature fields is allowed (P = 2); a change to the page's
    # content is a forbidden change in any validator that honours certification.
    first = not any(value is not None for value in existing.values())
    meta = signers.PdfSignatureMetadata(
        field_name=field_name, md_algorithm="sha256", subfilter=fields.SigSeedSubFilter.PADES,
        reason=meaning, name=signer_name, location=location, certify=first,
        docmdp_permissions=fields.MDPPerm.FILL_FORMS,
        # PAdES B-LT: the authority's certificate and its revocation list as of signing go
        # into the document security store, so validation needs nothing from the network.
        embed_validation_info=validation is not None,
        use_pades_lta=validation is not None and timestamper is not None,
        validation_context=None if validation is None else ValidationContext(
            trust_roots=[_as_asn1(validation.authority)],
            crls=list(validation.revocation_lists), allow_fetching=False,
            revocation_mode="soft-fail", moment=validation.at))
    visible = field_name in existing or field_name in reserve
    pdf_signer = _StationClockSigner(meta, signer, signing_time=signed_at,
                                     stamp_style=stamp_style() if visible else None,
                                     timestamper=timestamper)
    out = pdf_signer.sign_pdf(writer, appearance_text_params={"stamp": stamp or meaning})
    return out.getvalue()


def sign_record(pdf: bytes, signer: signers.Signer, *, field_name: str, meaning: str,
                signer_name: str, location: str | None = None, stamp: str | None = None,
                reserve: Mapping[str, StampBox] | None = None,
                signed_at: datetime | None = None,
                timestamper: TimeStamper | None = None,
                validation: ValidationData | None = None) -> bytes:
    """Add one PAdES signature as an incremental update and return the new PDF bytes.

    Incremental, so an earlier signature (the performer's) stays valid when a later one
    (the inspector's) is added. `reserve` adds empty signature fields over the record's
    boxes in the same update (the first signature of a revision does this); a signature
    whose field is one of them, or one reserved earlier, shows `stamp` in its box. A field
    name with no box gets an invisible signature. A field already signed is refused with
    ValueError: two signatures under one name would make the record ambiguous.
    `signed_at` is the signing time the signature states (default: now); `timestamper`
    adds an RFC 3161 signature time-stamp (PAdES B-T), the station's own unit's;
    `validation` embeds the authority and its revocation list (PAdES B-LT).
    """
    return _off_thread(_sign, pdf, signer, field_name, meaning, signer_name, location,
                       stamp, dict(reserve or {}), signed_at, timestamper, validation)


def _as_asn1(cert: crypto_x509.Certificate | asn1_x509.Certificate) -> asn1_x509.Certificate:
    if isinstance(cert, asn1_x509.Certificate):
        return cert
    return asn1_x509.Certificate.load(cert.public_bytes(Encoding.DER))


def _subject(cert: asn1_x509.Certificate) -> dict[str, str]:
    found: dict[str, str] = {}
    for key, value in cert.subject.native.items():
        if key in _SUBJECT_KEYS:
            found[_SUBJECT_KEYS[key]] = ", ".join(value) if isinstance(value, list) else value
    return found


def _coverage(level: SignatureCoverageLevel | None) -> str:
    if level is None:
        return "unknown"
    return _COVERAGE.get(level, level.name.lower().replace("_", " "))


def _summary(r: SignatureReport) -> str:
    who = r.signer + (f" (authorisation {r.authorisation})" if r.authorisation else "")
    when = r.signed_at.isoformat(timespec="seconds") if r.signed_at else "an unknown time"
    problems = [text for bad, text in (
        (not r.intact, "the signed bytes were changed"),
        (r.intact and not r.valid, "the signature does not verify"),
        (r.valid and not r.trusted, "the certificate is not trusted by this station"),
        (r.modified_after, "the record was changed after this signature"),
        (r.time_stamp_ok is False, "its time-stamp does not verify"),
    ) if bad]
    verdict = "intact, valid and trusted" if not problems else "NOT GOOD: " + "; ".join(problems)
    stamped = ("; time-stamped at " + r.time_stamped_at.isoformat(timespec="seconds")
               if r.time_stamped_at is not None and r.time_stamp_ok
               else "; no time-stamp: the time is the signer's word only"
               if r.time_stamp_ok is None else "")
    return f"{r.meaning or 'Signed'} by {who} at {when}{stamped}: {verdict}."


def _report(sig: EmbeddedPdfSignature, context: ValidationContext) -> SignatureReport:
    reason = str(sig.sig_object.get("/Reason", ""))
    subject = _subject(sig.signer_cert)
    status = validate_pdf_signature(sig, context)
    level = status.modification_level
    report = SignatureReport(
        field_name=sig.field_name, signer=subject.get("CN", "unknown signer"),
        authorisation=next((subject[k] for k in ("pseudonym", "serialNumber", "OU")
                            if k in subject), None),
        subject=subject, meaning=reason, signed_at=status.signer_reported_dt,
        # pyHanko's `valid` covers only the signed attributes; a record whose bytes no
        # longer match the signed digest is not validly signed, so valid needs intact too.
        intact=bool(status.intact), valid=bool(status.intact and status.valid),
        trusted=bool(status.trusted),
        coverage=_coverage(status.coverage),
        # Unknown level or a failed DocMDP check counts as modified: fail closed.
        modified_after=level not in _ACCEPTABLE or status.docmdp_ok is False,
        summary="", certificate_sha256=hashlib.sha256(sig.signer_cert.dump()).hexdigest())
    stamp = status.timestamp_validity
    if stamp is not None:
        report = replace(report, time_stamped_at=stamp.timestamp,
                         time_stamp_ok=bool(stamp.intact and stamp.valid and stamp.trusted))
    return replace(report, summary=_summary(report))


def _broken(name: str, sig_field: Any, exc: Exception) -> SignatureReport:
    """A signature whose CMS blob cannot be parsed: reported, never skipped (fail closed)."""
    try:
        reason = str(sig_field.get_object()["/V"].get_object().get("/Reason", ""))
    except (PdfError, KeyError, ValueError, TypeError):
        reason = ""
    return SignatureReport(
        field_name=name, signer="unknown signer", authorisation=None, subject={},
        meaning=reason, signed_at=None, intact=False, valid=False, trusted=False,
        coverage="unknown", modified_after=True,
        summary=f"The signature in field {name!r} cannot be read "
                f"({str(exc).splitlines()[0] if str(exc) else type(exc).__name__}): NOT GOOD.")


def _revision(reader: PdfFileReader, sig_field: Any) -> int:
    """The file revision that wrote this signature, so reports come in signing order."""
    try:
        return int(reader.xrefs.get_introducing_revision(
            sig_field.get_object().raw_get("/V").reference))
    except (AttributeError, KeyError, PdfError):
        return 1 << 30


def _verify(pdf: bytes, trust_root: asn1_x509.Certificate) -> list[SignatureReport]:
    try:
        reader = PdfFileReader(io.BytesIO(pdf))
        filled = list(fields.enumerate_sig_fields(reader, filled_status=True))
    except (PdfError, ValueError, KeyError, IndexError, TypeError) as exc:
        raise RecordUnreadable(f"The record could not be read as a PDF: {exc}") from exc
    context = ValidationContext(trust_roots=[trust_root], allow_fetching=False)
    reports = []
    for name, _, sig_field in sorted(filled, key=lambda f: _revision(reader, f[2])):
        try:
            embedded = EmbeddedPdfSignature(reader, sig_field, name)
            if embedded.sig_object_type == "/DocTimeStamp":
                # The document time-stamp after a signature's validation data (PAdES B-LTA):
                # not a person's signature, but it must verify too (fail closed).
                stamp = validate_pdf_timestamp(embedded, context)
                if not (stamp.intact and stamp.valid and stamp.trusted):
                    reports.append(_broken(name, sig_field, ValueError(
                        "a document time-stamp does not verify")))
                continue
            reports.append(_report(embedded, context))
        except (PdfError, ValueError, KeyError, TypeError) as exc:
            reports.append(_broken(name, sig_field, exc))
    return reports


def signed_fields(pdf: bytes) -> list[str]:
    """The names of the record's fields that hold a person's signature, in file order
    (document time-stamps left out); RecordUnreadable when the bytes are not a PDF."""
    def run() -> list[str]:
        reader = PdfFileReader(io.BytesIO(pdf))
        return [sig.field_name for sig in reader.embedded_signatures
                if sig.sig_object_type == "/Sig"]
    try:
        return _off_thread(run)
    except (PdfError, ValueError, KeyError, IndexError, TypeError) as exc:
        raise RecordUnreadable(f"The record could not be read as a PDF: {exc}") from exc


def empty_signature_fields(pdf: bytes) -> list[str]:
    """The names of the record's signature boxes nobody has signed yet (RecordUnreadable when
    the bytes are not a PDF)."""
    try:
        reader = PdfFileReader(io.BytesIO(pdf))
        return [name for name, _, _ in fields.enumerate_sig_fields(reader, filled_status=False)]
    except (PdfError, ValueError, KeyError, IndexError, TypeError) as exc:
        raise RecordUnreadable(f"The record could not be read as a PDF: {exc}") from exc


def verify_record(pdf: bytes, trust_root: crypto_x509.Certificate | asn1_x509.Certificate
                  ) -> list[SignatureReport]:
    """Check every signature in the record against the station's CA, oldest first.

    Returns one report per signature (an unsigned PDF gives []); raises RecordUnreadable
    when the bytes are not a readable PDF. Nothing is fetched from the network.
    """
    return _off_thread(_verify, pdf, _as_asn1(trust_root))


def all_good(reports: Iterable[SignatureReport]) -> bool:
    """True only if there is at least one signature and every one is intact, valid,
    trusted, unmodified and, where time-stamped, its time-stamp verifies: an unsigned
    record is not a good signed record."""
    reports = list(reports)
    return bool(reports) and all(r.good for r in reports)
