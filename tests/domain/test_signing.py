"""Signing and verifying work-record PDFs: what each kind of change to a record shows.

The certificates are made here with cryptography (a CA and a person, KeyUsage
digitalSignature + contentCommitment as TOOLCHAIN.md found necessary), independently of
webapp.records.identity. The record is a real WeasyPrint PDF. The expected outcomes are
the ones TOOLCHAIN.md records: untouched → intact and trusted; one byte flipped →
invalid; an incremental update adding content → modified; a proper second signature →
acceptable.
"""

from __future__ import annotations

import asyncio
import io
import re
from datetime import UTC, datetime, timedelta

import pytest
from asn1crypto import keys as asn1_keys
from asn1crypto import x509 as asn1_x509
from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.x509.oid import NameOID
from pyhanko.pdf_utils import generic
from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
from pyhanko.sign import signers
from pyhanko_certvalidator.registry import SimpleCertificateStore

from webapp.records import signing
from webapp.records.signing import RecordUnreadable, all_good, sign_record, verify_record

NOW = datetime.now(UTC)
DER = serialization.Encoding.DER


def _usage(*, ca: bool) -> x509.KeyUsage:
    return x509.KeyUsage(
        digital_signature=not ca, content_commitment=not ca, key_encipherment=False,
        data_encipherment=False, key_agreement=False, key_cert_sign=ca, crl_sign=ca,
        encipher_only=False, decipher_only=False)


def _make_ca(name: str) -> tuple[ec.EllipticCurvePrivateKey, x509.Certificate]:
    key = ec.generate_private_key(ec.SECP256R1())
    subject = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, name)])
    cert = (x509.CertificateBuilder().subject_name(subject).issuer_name(subject)
            .public_key(key.public_key()).serial_number(x509.random_serial_number())
            .not_valid_before(NOW - timedelta(days=1)).not_valid_after(NOW + timedelta(days=30))
            .add_extension(x509.BasicConstraints(ca=True, path_length=0), critical=True)
            .add_extension(_usage(ca=True), critical=True)
            .sign(key, hashes.SHA256()))
    return key, cert


def _make_signer(ca: tuple[ec.EllipticCurvePrivateKey, x509.Certificate], name: str,
                 authorisation: str) -> signers.SimpleSigner:
    ca_key, ca_cert = ca
    key = ec.generate_private_key(ec.SECP256R1())
    cert = (x509.CertificateBuilder()
            .subject_name(x509.Name([
                x509.NameAttribute(NameOID.COMMON_NAME, name),
                x509.NameAttribute(NameOID.SERIAL_NUMBER, authorisation)]))
            .issuer_name(ca_cert.subject).public_key(key.public_key())
            .serial_number(x509.random_serial_number())
            .not_valid_before(NOW - timedelta(days=1)).not_valid_after(NOW + timedelta(days=30))
            .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
            .add_extension(_usage(ca=False), critical=True)
            .sign(ca_key, hashes.SHA256()))
    key_der = key.private_bytes(DER, serialization.PrivateFormat.PKCS8,
                                serialization.NoEncryption())
    return signers.SimpleSigner(
        signing_cert=asn1_x509.Certificate.load(cert.public_bytes(DER)),
        signing_key=asn1_keys.PrivateKeyInfo.load(key_der),
        cert_registry=SimpleCertificateStore.from_certs(
            [asn1_x509.Certificate.load(ca_cert.public_bytes(DER))]))


@pytest.fixture(scope="module")
def station_ca():
    return _make_ca("Test station certificate authority")


@pytest.fixture(scope="module")
def performer(station_ca):
    return _make_signer(station_ca, "Alex Performer", "AUTH-1001")


@pytest.fixture(scope="module")
def inspector(station_ca):
    return _make_signer(station_ca, "Robin Inspector", "AUTH-2002")


@pytest.fixture(scope="module")
def record_pdf() -> bytes:
    from weasyprint import HTML
    return HTML(string="<h1>Work record</h1><p>Igniter plug replaced, position 1.</p>"
                ).write_pdf()


@pytest.fixture(scope="module")
def signed_once(record_pdf, performer) -> bytes:
    return sign_record(record_pdf, performer, field_name="Performer", meaning="Performed",
                       signer_name="Alex Performer", location="Hangar 2")


def test_an_untouched_record_is_intact_valid_trusted_and_says_who_and_why(signed_once,
                                                                          station_ca):
    # 21 CFR 11.50: the printed name, the meaning and the time travel with the signature.
    [report] = verify_record(signed_once, station_ca[1])
    assert (report.intact, report.valid, report.trusted) == (True, True, True)
    assert report.modified_after is False
    assert report.coverage == "entire file"
    assert report.field_name == "Performer"
    assert report.signer == "Alex Performer"
    assert report.authorisation == "AUTH-1001"
    assert report.subject == {"CN": "Alex Performer", "serialNumber": "AUTH-1001"}
    assert report.meaning == "Performed"
    assert report.signed_at is not None and abs(report.signed_at - datetime.now(UTC)) < \
        timedelta(minutes=5)
    assert "Alex Performer" in report.summary and "intact, valid and trusted" in report.summary
    assert all_good([report])


def test_the_trust_root_may_be_given_in_asn1crypto_form(signed_once, station_ca):
    root = asn1_x509.Certificate.load(station_ca[1].public_bytes(DER))
    assert all_good(verify_record(signed_once, root))


def _signed_range_offset(pdf: bytes) -> int:
    """An offset inside the first signed byte range, before /Contents: a letter of the
    /Producer value, so the file still parses and only the digest can notice."""
    match = re.search(rb"/ByteRange\s*\[\s*(\d+)\s+(\d+)\s+(\d+)\s+(\d+)", pdf)
    assert match
    contents_start = int(match.group(2))
    producer = pdf.find(b"WeasyPrint")
    assert 0 < producer < contents_start
    return producer + 1


def test_one_flipped_byte_in_the_signed_range_makes_the_signature_fail(signed_once,
                                                                       station_ca):
    # 21 CFR 11.70: the signature is bound to these exact bytes; any change shows.
    tampered = bytearray(signed_once)
    offset = _signed_range_offset(signed_once)
    tampered[offset] ^= 0x01
    [report] = verify_record(bytes(tampered), station_ca[1])
    assert report.intact is False and report.valid is False
    assert not all_good([report])
    assert "signed bytes were changed" in report.summary
    assert "not trusted" not in report.summary  # one cause, stated once


def test_a_corrupted_signature_blob_is_reported_not_raised(signed_once, station_ca):
    # The /Contents hex is outside the byte range; wrecking it must still fail the check.
    match = re.search(rb"/Contents\s*<", signed_once)
    assert match
    broken = bytearray(signed_once)
    broken[match.end():match.end() + 8] = b"00000000"
    [report] = verify_record(bytes(broken), station_ca[1])
    assert (report.field_name, report.meaning) == ("Performer", "Performed")
    assert (report.intact, report.valid, report.trusted) == (False, False, False)
    assert report.modified_after is True and not all_good([report])
    assert "cannot be read" in report.summary and "\n" not in report.summary


def _append_content_without_signing(pdf: bytes) -> bytes:
    """What a forger with a PDF library would do: overlay text on page 1 as a new
    incremental update, leaving the original signature bytes untouched."""
    writer = IncrementalPdfFileWriter(io.BytesIO(pdf))
    stream = generic.StreamObject(stream_data=b"BT /F1 12 Tf 72 72 Td (Inspected OK) Tj ET")
    writer.add_stream_to_page(0, writer.add_object(stream))
    out = io.BytesIO()
    writer.write(out)
    return out.getvalue()


def test_content_added_after_signing_is_reported_as_a_modification(signed_once, station_ca):
    # 21 CFR 11.10(e) / 11.70: a change after signing must never pass as the signed record.
    altered = signing._off_thread(_append_content_without_signing, signed_once)
    [report] = verify_record(altered, station_ca[1])
    assert report.intact is True and report.valid is True  # the signed revision is unchanged
    assert report.coverage == "entire revision"
    assert report.modified_after is True
    assert not all_good([report])
    assert "changed after this signature" in report.summary


def test_a_certificate_from_another_authority_is_not_trusted(record_pdf, station_ca):
    stranger = _make_signer(_make_ca("Some other authority"), "Pat Stranger", "AUTH-9999")
    signed = sign_record(record_pdf, stranger, field_name="Performer", meaning="Performed",
                         signer_name="Pat Stranger")
    [report] = verify_record(signed, station_ca[1])
    assert report.intact is True and report.valid is True
    assert report.trusted is False
    assert not all_good([report])
    assert "not trusted by this station" in report.summary


def test_performer_then_inspector_both_verify_and_the_second_is_not_a_modification(
        signed_once, inspector, station_ca):
    both = sign_record(signed_once, inspector, field_name="Inspector", meaning="Inspected",
                       signer_name="Robin Inspector")
    first, second = verify_record(both, station_ca[1])
    assert (first.field_name, first.meaning, first.signer) == (
        "Performer", "Performed", "Alex Performer")
    assert (second.field_name, second.meaning, second.signer) == (
        "Inspector", "Inspected", "Robin Inspector")
    assert first.intact and first.valid and first.trusted
    assert second.intact and second.valid and second.trusted
    assert first.coverage == "entire revision" and second.coverage == "entire file"
    assert first.modified_after is False and second.modified_after is False
    assert all_good([first, second])


def test_a_second_signature_under_a_used_field_name_is_refused(signed_once, inspector):
    with pytest.raises(ValueError, match="already signed in the field 'Performer'"):
        sign_record(signed_once, inspector, field_name="Performer", meaning="Inspected",
                    signer_name="Robin Inspector")


def test_an_unsigned_record_has_no_signatures_and_is_not_good(record_pdf, station_ca):
    assert verify_record(record_pdf, station_ca[1]) == []
    assert all_good([]) is False


@pytest.mark.parametrize("junk", [b"", b"not a pdf at all", b"%PDF-1.7\n garbage \x00\xff"])
def test_bytes_that_are_not_a_pdf_are_unreadable(junk, station_ca):
    with pytest.raises(RecordUnreadable):
        verify_record(junk, station_ca[1])


def test_signing_bytes_that_are_not_a_pdf_is_refused(performer):
    with pytest.raises(RecordUnreadable):
        sign_record(b"not a pdf at all", performer, field_name="Performer",
                    meaning="Performed", signer_name="Alex Performer")


def test_signing_works_while_an_event_loop_runs_in_the_calling_thread(record_pdf, performer,
                                                                       station_ca):
    # The TOOLCHAIN.md pitfall: pyHanko's asyncio.run() inside a running loop.
    async def inside_a_loop() -> list[signing.SignatureReport]:
        signed = sign_record(record_pdf, performer, field_name="Performer",
                             meaning="Performed", signer_name="Alex Performer")
        return verify_record(signed, station_ca[1])

    assert all_good(asyncio.run(inside_a_loop()))
