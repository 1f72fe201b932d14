"""Signing identities: the station's authority, sealed personal keys and a real PDF signature."""

from __future__ import annotations

import base64
import io
import json
import stat
from concurrent.futures import ThreadPoolExecutor
from datetime import UTC, datetime, timedelta

import pytest
from cryptography import x509
from cryptography.hazmat.primitives import serialization
from cryptography.x509.oid import NameOID
from pyhanko.pdf_utils import generic
from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
from pyhanko.pdf_utils.reader import PdfFileReader
from pyhanko.pdf_utils.writer import PageObject, PdfFileWriter
from pyhanko.sign import fields, signers
from pyhanko.sign.validation import validate_pdf_signature
from pyhanko_certvalidator import ValidationContext

from webapp.records.identity import (
    CERT_FILE,
    KEY_FILE,
    PinProblem,
    SealedKey,
    WrongPin,
    asn1_certificate,
    check_pin,
    create_authority,
    enrol_signer,
    issue_person_certificate,
    load_authority,
    save_authority,
    seal_key,
    signer_for,
    unseal_key,
)

NOW = datetime(2026, 12, 1, 8, 0, tzinfo=UTC)
PIN = "482916"


@pytest.fixture(scope="module")
def authority():
    return create_authority("Hangar 3", NOW, operator="Example Air Services")


@pytest.fixture(scope="module")
def person(authority):
    return issue_person_certificate(authority, full_name="Dana Okafor", username="dokafor",
                                    authorisation="B1-40217", now=NOW)


@pytest.fixture(scope="module")
def sealed(person):
    return seal_key(person[0], PIN)


def _public_numbers(key):
    return key.public_key().public_numbers()


def _key_der(key) -> bytes:
    return key.private_bytes(serialization.Encoding.DER, serialization.PrivateFormat.PKCS8,
                             serialization.NoEncryption())


# --- the station's authority -------------------------------------------------------------

def test_authority_is_a_self_signed_ca_that_only_signs_certificates(authority):
    cert = authority.cert
    cert.verify_directly_issued_by(cert)  # raises unless self-signed with its own key
    constraints = cert.extensions.get_extension_for_class(x509.BasicConstraints)
    assert constraints.critical and constraints.value.ca
    usage = cert.extensions.get_extension_for_class(x509.KeyUsage)
    # RFC 5280 §4.2.1.3: keyCertSign and cRLSign for a CA; it signs no documents itself.
    assert usage.critical and usage.value.key_cert_sign and usage.value.crl_sign
    assert not usage.value.digital_signature and not usage.value.content_commitment
    names = cert.subject.get_attributes_for_oid(NameOID.COMMON_NAME)
    assert [n.value for n in names] == ["Hangar 3 certificate authority"]
    lifetime = cert.not_valid_after_utc - cert.not_valid_before_utc
    assert lifetime >= timedelta(days=20 * 365)


def test_authority_round_trips_through_its_folder(authority, tmp_path):
    save_authority(authority, tmp_path, b"station passphrase")
    loaded = load_authority(tmp_path, b"station passphrase")
    assert loaded.cert == authority.cert
    assert _public_numbers(loaded.key) == _public_numbers(authority.key)


def test_authority_key_is_encrypted_and_private_to_the_owner(authority, tmp_path):
    (tmp_path / KEY_FILE).write_bytes(b"old")
    (tmp_path / KEY_FILE).chmod(0o644)  # an older, looser file must not keep its mode
    save_authority(authority, tmp_path, b"station passphrase")
    key_file = tmp_path / KEY_FILE
    assert stat.S_IMODE(key_file.stat().st_mode) == 0o600
    assert b"ENCRYPTED PRIVATE KEY" in key_file.read_bytes()
    assert b"CERTIFICATE" in (tmp_path / CERT_FILE).read_bytes()


def test_authority_refuses_a_wrong_passphrase(authority, tmp_path):
    save_authority(authority, tmp_path, b"station passphrase")
    with pytest.raises(ValueError):
        load_authority(tmp_path, b"a guess")


def test_certificate_times_must_carry_a_timezone():
    with pytest.raises(ValueError, match="timezone"):
        create_authority("Hangar 3", datetime(2026, 12, 1, 8, 0))


# --- a person's certificate -------------------------------------------------------------

def test_person_certificate_is_issued_by_the_station_authority(authority, person):
    _, cert = person
    cert.verify_directly_issued_by(authority.cert)
    assert cert.issuer == authority.cert.subject
    authority_ski = authority.cert.extensions.get_extension_for_class(
        x509.SubjectKeyIdentifier).value.digest
    aki = cert.extensions.get_extension_for_class(x509.AuthorityKeyIdentifier).value
    assert aki.key_identifier == authority_ski
    assert not cert.extensions.get_extension_for_class(x509.BasicConstraints).value.ca


def test_person_certificate_may_sign_and_commit_to_content(person):
    usage = person[1].extensions.get_extension_for_class(x509.KeyUsage)
    # RFC 5280 §4.2.1.3: digitalSignature + nonRepudiation (contentCommitment) bits;
    # pyHanko's validator expects nonRepudiation on a document signer by default.
    assert usage.critical
    assert usage.value.digital_signature and usage.value.content_commitment
    assert not usage.value.key_cert_sign


def test_person_certificate_names_its_signer(person):
    # 21 CFR 11.70 / 11.50(a)(1): the signature is linked to its signer, so the certificate
    # names the person, their station username and their authorisation number.
    subject = person[1].subject
    assert subject.get_attributes_for_oid(NameOID.COMMON_NAME)[0].value == "Dana Okafor"
    assert subject.get_attributes_for_oid(NameOID.USER_ID)[0].value == "dokafor"
    assert subject.get_attributes_for_oid(NameOID.SERIAL_NUMBER)[0].value == "B1-40217"
    lifetime = person[1].not_valid_after_utc - person[1].not_valid_before_utc
    assert timedelta(days=3 * 365) <= lifetime < timedelta(days=3 * 366 + 1)


def test_person_without_authorisation_gets_no_number(authority):
    _, cert = issue_person_certificate(authority, full_name="Sam Lee", username="slee",
                                       authorisation=None, now=NOW)
    assert cert.subject.get_attributes_for_oid(NameOID.SERIAL_NUMBER) == []


# --- sealing a key under a PIN ------------------------------------------------------------

def test_the_right_pin_unseals_the_same_key(person, sealed):
    assert _public_numbers(unseal_key(sealed, PIN)) == _public_numbers(person[0])


def test_a_wrong_pin_raises_wrong_pin(sealed):
    with pytest.raises(WrongPin):
        unseal_key(sealed, "482917")


def test_a_tampered_ciphertext_raises_wrong_pin(sealed):
    flipped = bytes([sealed.ciphertext[0] ^ 0x01]) + sealed.ciphertext[1:]
    altered = SealedKey(salt=sealed.salt, nonce=sealed.nonce, ciphertext=flipped,
                        time_cost=sealed.time_cost, memory_cost=sealed.memory_cost,
                        parallelism=sealed.parallelism)
    with pytest.raises(WrongPin):
        unseal_key(altered, PIN)


def test_sealed_json_round_trips_and_holds_no_readable_key(person, sealed):
    text = sealed.to_json()
    der = _key_der(person[0])
    assert "PRIVATE KEY" not in text
    assert der not in text.encode() and base64.b64encode(der).decode() not in text
    assert der[8:40].hex() not in text  # not even a hex dump of the key body
    again = SealedKey.from_json(text)
    assert again == sealed
    assert _public_numbers(unseal_key(again, PIN)) == _public_numbers(person[0])


def test_kdf_parameters_are_at_least_the_floor(sealed):
    # Argon2id floor set for Sparkward (RFC 9106 §4, second recommended option: t=3, 64 MiB).
    data = json.loads(sealed.to_json())
    assert data["time_cost"] >= 3 and data["memory_cost"] >= 64 * 1024
    assert data["parallelism"] >= 1
    assert len(sealed.salt) >= 16 and len(sealed.nonce) == 12


def test_two_seals_use_different_salts_and_nonces(person, sealed):
    again = seal_key(person[0], PIN)
    assert again.salt != sealed.salt and again.nonce != sealed.nonce
    assert again.ciphertext != sealed.ciphertext


# --- the signing PIN rule -----------------------------------------------------------------

@pytest.mark.parametrize("pin", ["12345", "12345a", "", "123 456", "١٢٣٤٥٦"])
def test_check_pin_refuses(pin):
    with pytest.raises(PinProblem):
        check_pin(pin)


@pytest.mark.parametrize("pin", ["123456", "0000000000"])
def test_check_pin_accepts(pin):
    check_pin(pin)


def test_enrolment_refuses_a_weak_pin(authority):
    with pytest.raises(PinProblem, match="6 digits"):
        enrol_signer(authority, full_name="Sam Lee", username="slee", authorisation=None,
                     pin="1234", now=NOW)


# --- signing a PDF ---------------------------------------------------------------------------

def _tiny_pdf() -> bytes:
    writer = PdfFileWriter()
    contents = writer.add_object(generic.StreamObject(stream_data=b"0 0 m 10 10 l S"))
    writer.insert_page(PageObject(contents=contents, media_box=(0, 0, 200, 200)))
    out = io.BytesIO()
    writer.write(out)
    return out.getvalue()


def _sign_and_validate(signer, pdf: bytes, trust_root, flip_at: int | None = None):
    meta = signers.PdfSignatureMetadata(field_name="Performer", md_algorithm="sha256",
                                        subfilter=fields.SigSeedSubFilter.PADES)
    signed = signers.sign_pdf(IncrementalPdfFileWriter(io.BytesIO(pdf)), meta,
                              signer=signer).getvalue()
    if flip_at is not None:
        signed = signed[:flip_at] + bytes([signed[flip_at] ^ 0x01]) + signed[flip_at + 1:]
    embedded = PdfFileReader(io.BytesIO(signed)).embedded_signatures[0]
    return validate_pdf_signature(embedded, ValidationContext(trust_roots=[trust_root]))


def _in_worker(*args):
    # TOOLCHAIN.md: pyHanko's sync API calls asyncio.run(); keep it off the main thread.
    with ThreadPoolExecutor(1) as pool:
        return pool.submit(_sign_and_validate, *args).result()


@pytest.fixture(scope="module")
def live_enrolment():
    # Real time: the validator checks the certificate against the clock now.
    authority = create_authority("Hangar 3", datetime.now(UTC))
    enrolment = enrol_signer(authority, full_name="Dana Okafor", username="dokafor",
                             authorisation="B1-40217", pin=PIN, now=datetime.now(UTC))
    return authority, enrolment


def test_a_signed_pdf_is_intact_valid_and_trusted(live_enrolment):
    authority, enrolment = live_enrolment
    signer = signer_for(enrolment, PIN, authority.cert)
    status = _in_worker(signer, _tiny_pdf(), asn1_certificate(authority.cert))
    assert status.intact and status.valid and status.trusted
    assert status.signing_cert.subject.native["common_name"] == "Dana Okafor"


def test_a_signature_is_untrusted_under_another_authority(live_enrolment):
    authority, enrolment = live_enrolment
    stranger = create_authority("Elsewhere", datetime.now(UTC))
    status = _in_worker(signer_for(enrolment, PIN, authority.cert), _tiny_pdf(),
                        asn1_certificate(stranger.cert))
    assert status.intact and not status.trusted


def test_one_flipped_byte_of_the_page_breaks_the_signature(live_enrolment):
    authority, enrolment = live_enrolment
    pdf = _tiny_pdf()
    status = _in_worker(signer_for(enrolment, PIN, authority.cert), pdf,
                        asn1_certificate(authority.cert), pdf.index(b"10 10 l"))
    assert not status.intact


def test_signer_for_refuses_a_wrong_pin(live_enrolment):
    authority, enrolment = live_enrolment
    with pytest.raises(WrongPin):
        signer_for(enrolment, "000000", authority.cert)
