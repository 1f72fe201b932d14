"""Every record signature carries an RFC 3161 time-stamp token from the station's own unit
(PAdES B-T). The token is parsed with asn1crypto and its signature checked with the
`cryptography` library against the unit's certificate, which chains to the station CA and
allows time-stamping only; pyHanko's own validator agrees.

Sources: RFC 3161 2.3 (the TSA certificate's only extended key usage is id-kp-timeStamping,
critical), 2.4.2 (TSTInfo); RFC 5652 5.4 (signed attributes are signed as a DER SET);
ETSI EN 319 142-1 (PAdES B-T: the signature-time-stamp over the signature value)."""

from __future__ import annotations

import hashlib
import io

import pytest
from asn1crypto import cms, tsp
from cryptography import x509
from cryptography.hazmat.primitives import hashes
from cryptography.hazmat.primitives.asymmetric import padding
from cryptography.x509.oid import ExtendedKeyUsageOID
from pyhanko.pdf_utils.reader import PdfFileReader
from pyhanko.sign.validation import validate_pdf_signature
from pyhanko_certvalidator import ValidationContext

from tests.conftest import DEMO_PINS
from tests.pdf_text import pdf_text
from tests.web.jobs import Job, _event
from webapp.records import signing
from webapp.records.identity import asn1_certificate
from webapp.records.record_entries import station_time
from webapp.station.authority import station_authority
from webapp.store import signers


@pytest.fixture
def authority(db_path, clock):
    return station_authority(db_path, "Test station", clock())


@pytest.fixture
def signed(mechanic, login, db, clock):
    job = Job(mechanic, db, clock, "exciter-removal")
    job.walk_to("performer")
    job.ok(_event("performer", "signed", pin=DEMO_PINS["mech1"]))
    first_at = clock()
    clock.advance(90)
    job.walk_to("inspector")
    job.ok(_event("inspector", "signed", pin=DEMO_PINS["mech2"]), client=login("mech2"))
    return signers.latest_record(db, job.id)["pdf"], [first_at, clock()]


def _tokens(pdf: bytes) -> list[tuple[bytes, cms.ContentInfo]]:
    """(signature value, time-stamp token) of each signature, oldest first."""
    reader = PdfFileReader(io.BytesIO(pdf))
    found = []
    for sig in reader.embedded_signatures:
        if sig.sig_object_type != "/Sig":    # the document time-stamps (B-LTA) come later
            continue
        signer_info = sig.signer_info
        [token] = [attr["values"][0] for attr in signer_info["unsigned_attrs"]
                   if attr["type"].native == "signature_time_stamp_token"]
        found.append((signer_info["signature"].native, token))
    return found


def test_the_unit_certificate_allows_time_stamping_only_and_chains_to_the_station_ca(
        authority):
    unit = authority.time_stamps.cert
    usage = unit.extensions.get_extension_for_class(x509.ExtendedKeyUsage)
    assert usage.critical and list(usage.value) == [ExtendedKeyUsageOID.TIME_STAMPING]
    assert unit.extensions.get_extension_for_class(x509.BasicConstraints).value.ca is False
    unit.verify_directly_issued_by(authority.cert)          # signed by the station CA
    assert unit.public_key() != authority.cert.public_key()  # a key of its own


def test_every_signature_carries_a_token_over_its_own_value_at_the_stamped_time(
        signed, authority, db, tmp_path):
    pdf, times = signed
    tokens = _tokens(pdf)
    assert len(tokens) == 2
    text = " ".join(pdf_text(pdf, tmp_path).split())   # the stamps, as a reader shows them
    person_keys = [x509.load_pem_x509_certificate(row["cert_pem"].encode()).public_key()
                   for row in db.query("select cert_pem from signers")]
    for (signature_value, token), at in zip(tokens, times, strict=True):
        signed_data = token["content"]
        content = signed_data["encap_content_info"]["content"]
        info = tsp.TSTInfo.load(content.contents)   # the TSTInfo, as the DER bytes signed
        # The imprint is the hash of this signature's value (PAdES B-T).
        assert info["message_imprint"]["hashed_message"].native == hashlib.sha256(
            signature_value).digest()
        # The token's time is the instant the stamp prints (station clock, to the second).
        assert info["gen_time"].native.replace(microsecond=0) == at.replace(microsecond=0)
        assert station_time(info["gen_time"].native) in text
        # The token's signature, checked with `cryptography` against the unit's certificate.
        [signer_info] = signed_data["signer_infos"]
        attrs = signer_info["signed_attrs"]
        digest = next(a["values"][0].native for a in attrs if a["type"].native ==
                      "message_digest")
        assert digest == hashlib.sha256(content.contents).digest()
        unit_key = authority.time_stamps.cert.public_key()
        unit_key.verify(signer_info["signature"].native,
                        cms.CMSAttributes(list(attrs)).dump(force=True),
                        padding.PKCS1v15(), hashes.SHA256())
        assert unit_key not in person_keys


def test_pyhanko_validates_each_time_stamp_against_the_station_ca(signed, authority):
    pdf, times = signed

    def run():
        reader = PdfFileReader(io.BytesIO(pdf))
        context = ValidationContext(trust_roots=[asn1_certificate(authority.cert)],
                                    allow_fetching=False)
        return [validate_pdf_signature(sig, context).timestamp_validity
                for sig in reader.embedded_signatures if sig.sig_object_type == "/Sig"]

    for stamp, at in zip(signing._off_thread(run), times, strict=True):
        assert stamp is not None and stamp.intact and stamp.valid and stamp.trusted
        assert stamp.timestamp.replace(microsecond=0) == at.replace(microsecond=0)
    reports = signing.verify_record(pdf, authority.cert)
    assert all(r.time_stamp_ok for r in reports) and signing.all_good(reports)
    assert all("time-stamped at" in r.summary for r in reports)


def test_a_token_from_a_unit_the_station_does_not_know_fails_the_signature(clock):
    """A unit of another authority time-stamps a signature the station would trust: the
    token's trust fails, so the signature is not good (fail closed)."""
    from weasyprint import HTML

    from tests.domain.test_signing import _make_ca, _make_signer
    from webapp.records import identity, timestamping

    stranger_ca = identity.create_authority("Elsewhere", clock())
    stranger = timestamping.issue_time_stamp_unit(stranger_ca, "Elsewhere")
    ca = _make_ca("Test CA")
    signer = _make_signer(ca, "Pat Signer", "AUTH-9")
    stamped = signing.sign_record(
        HTML(string="<p>record</p>").write_pdf(), signer, field_name="performer",
        meaning="Performed", signer_name="Pat Signer",
        timestamper=timestamping.StationTimeStamper(stranger, stranger_ca.cert, clock()))
    [report] = signing.verify_record(stamped, ca[1])
    assert report.intact and report.valid and report.trusted
    assert report.time_stamp_ok is False
    assert not signing.all_good([report]) and "time-stamp does not verify" in report.summary
