"""Signing work-record PDFs and verifying them (PAdES B-B with pyHanko).

Why real PDF signatures: the signature is bound to the exact bytes of the record, so
it cannot be excised, copied or moved to another record by ordinary means (21 CFR
11.70), and any reader can check it without Sparkward. Each signature carries the
signer's printed name and its meaning as /Name and /Reason (21 CFR 11.50).

Why a worker thread: pyHanko's sync API calls ``asyncio.run()``, which fails when an
event loop already runs in the calling thread (pytest-playwright, some servers). Every
pyHanko call here goes through one module-level worker thread, which also keeps a web
request's thread free of pyHanko's event loop.
"""

from __future__ import annotations

import io
from collections.abc import Callable, Iterable
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
from pyhanko.sign.validation import validate_pdf_signature
from pyhanko.sign.validation.pdf_embedded import EmbeddedPdfSignature
from pyhanko.sign.validation.status import SignatureCoverageLevel
from pyhanko_certvalidator import ValidationContext

T = TypeVar("T")

_EXECUTOR = ThreadPoolExecutor(max_workers=1, thread_name_prefix="sparkward-pyhanko")

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


class RecordUnreadable(ValueError):
    """The bytes are not a PDF that can be parsed; nothing can be said about signatures."""


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


def _off_thread(fn: Callable[..., T], *args: Any) -> T:
    """Run ``fn`` in the pyHanko worker thread and wait for it (exceptions propagate)."""
    return _EXECUTOR.submit(fn, *args).result()


def _sign(pdf: bytes, signer: signers.Signer, field_name: str, meaning: str,
          signer_name: str, location: str | None) -> bytes:
    try:
        writer = IncrementalPdfFileWriter(io.BytesIO(pdf))
    except (PdfError, ValueError) as exc:
        raise RecordUnreadable(f"The record could not be read as a PDF: {exc}") from exc
    if any(name == field_name for name, _, _ in fields.enumerate_sig_fields(writer)):
        raise ValueError(f"The record already has a signature field named {field_name!r}.")
    meta = signers.PdfSignatureMetadata(
        field_name=field_name, md_algorithm="sha256", subfilter=fields.SigSeedSubFilter.PADES,
        reason=meaning, name=signer_name, location=location)
    out = signers.sign_pdf(writer, meta, signer=signer)
    return out.getvalue()


def sign_record(pdf: bytes, signer: signers.Signer, *, field_name: str, meaning: str,
                signer_name: str, location: str | None = None) -> bytes:
    """Add one PAdES signature as an incremental update and return the new PDF bytes.

    Incremental, so an earlier signature (the performer's) stays valid when a later one
    (the inspector's) is added. A field name already used is refused with ValueError:
    two signatures under one name would make the record ambiguous about who signed what.
    """
    return _off_thread(_sign, pdf, signer, field_name, meaning, signer_name, location)


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
    ) if bad]
    verdict = "intact, valid and trusted" if not problems else "NOT GOOD: " + "; ".join(problems)
    return f"{r.meaning or 'Signed'} by {who} at {when}: {verdict}."


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
        summary="")
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
            reports.append(_report(EmbeddedPdfSignature(reader, sig_field, name), context))
        except (PdfError, ValueError, KeyError, TypeError) as exc:
            reports.append(_broken(name, sig_field, exc))
    return reports


def verify_record(pdf: bytes, trust_root: crypto_x509.Certificate | asn1_x509.Certificate
                  ) -> list[SignatureReport]:
    """Check every signature in the record against the station's CA, oldest first.

    Returns one report per signature (an unsigned PDF gives []); raises RecordUnreadable
    when the bytes are not a readable PDF. Nothing is fetched from the network.
    """
    return _off_thread(_verify, pdf, _as_asn1(trust_root))


def all_good(reports: Iterable[SignatureReport]) -> bool:
    """True only if there is at least one signature and every one is intact, valid,
    trusted and unmodified: an unsigned record is not a good signed record."""
    reports = list(reports)
    return bool(reports) and all(r.intact and r.valid and r.trusted and not r.modified_after
                                 for r in reports)
