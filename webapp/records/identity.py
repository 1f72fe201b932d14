"""Personal signing identities: the station's certificate authority and each signer's sealed key.

The station issues every signer a certificate from its own authority at enrolment,
but it must not be able to sign for a person on its own (21 CFR 11.200(a): every
signing outside one continuous session uses an identification and a secret; 11.70:
the signature is linked to its signer). So the person's private key is never stored
in the clear: it is sealed with AES-256-GCM under a key derived from their signing
PIN with Argon2id, and only the PIN unseals it for one signing. The station keeps
the sealed key and the certificate; a wrong PIN fails loudly and never yields a key.

The authority's and the TLS server's keys are EC P-256. A person's signing key is RSA
3072 (the same ~128-bit strength, NIST SP 800-57 Pt 1 Table 2): an ECDSA signature in a
PDF is an ISO/TS 32002 extension of PDF 2.0, which would lift every signed record's
catalog to version 2.0 while the record is an archival PDF/A-3 file, a PDF 1.7 profile;
RSA signatures are PDF 1.7's own, so header, catalog and archival profile agree.
Generating the key takes about half a second, once per enrolment.

The same authority also issues the station its own TLS server certificate for the hangar
LAN (`server_identity`), so tablets that trust the authority get a secure origin.
"""

from __future__ import annotations

import base64
import json
import os
import secrets
from dataclasses import dataclass
from datetime import datetime, timedelta
from pathlib import Path
from typing import Any

from argon2.low_level import Type, hash_secret_raw
from asn1crypto import keys as asn1_keys
from asn1crypto import x509 as asn1_x509
from cryptography import x509
from cryptography.exceptions import InvalidTag
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec, rsa
from cryptography.hazmat.primitives.ciphers.aead import AESGCM
from cryptography.x509.oid import NameOID
from pyhanko.sign import signers
from pyhanko_certvalidator.registry import SimpleCertificateStore

AUTHORITY_VALIDITY = timedelta(days=7305)  # 20 years, leap days included
# The authority is valid from two days before it is made: tablets' clocks may run behind the
# station's, and a demo station's history (its jobs began hours before it was built) is
# signed with certificates issued before its first event.
AUTHORITY_LEAD = timedelta(days=2)
PERSON_VALIDITY = timedelta(days=1096)  # 3 years, one leap day included
KEY_FILE = "authority-key.pem"
CERT_FILE = "authority-cert.pem"
# RFC 9106 §4 second recommended option is t=3, m=64 MiB (with p=4); p=1 because the
# station unseals on the request thread. Measured ~0.31 s per unseal on 2 cores.
TIME_COST = 3
MEMORY_COST_KIB = 64 * 1024
PARALLELISM = 1
SCHEME = "argon2id+aes-256-gcm/pkcs8-der"
MIN_PIN_DIGITS = 6


class WrongPin(ValueError):
    """The PIN does not unseal this key (or the sealed key was altered)."""


class PinProblem(ValueError):
    """A chosen PIN does not meet the station's rule."""


@dataclass(frozen=True)
class StationAuthority:
    cert: x509.Certificate
    key: ec.EllipticCurvePrivateKey
    time_stamps: Any = None   # the station's time-stamp unit (timestamping.TimeStampUnit)
    crl_url: str | None = None  # where the station publishes its revocation list


@dataclass(frozen=True)
class SealedKey:
    salt: bytes
    nonce: bytes
    ciphertext: bytes
    time_cost: int = TIME_COST
    memory_cost: int = MEMORY_COST_KIB
    parallelism: int = PARALLELISM

    def to_json(self) -> str:
        def b64(raw: bytes) -> str:
            return base64.b64encode(raw).decode("ascii")

        return json.dumps({"scheme": SCHEME, "salt": b64(self.salt), "nonce": b64(self.nonce),
                           "ciphertext": b64(self.ciphertext), "time_cost": self.time_cost,
                           "memory_cost": self.memory_cost, "parallelism": self.parallelism})

    @classmethod
    def from_json(cls, text: str) -> SealedKey:
        data = json.loads(text)
        if data.get("scheme") != SCHEME:
            raise ValueError(f"Unknown sealed-key scheme {data.get('scheme')!r}.")
        return cls(salt=base64.b64decode(data["salt"]), nonce=base64.b64decode(data["nonce"]),
                   ciphertext=base64.b64decode(data["ciphertext"]),
                   time_cost=int(data["time_cost"]), memory_cost=int(data["memory_cost"]),
                   parallelism=int(data["parallelism"]))


@dataclass(frozen=True)
class Enrolment:
    cert_pem: str
    sealed: SealedKey

    @property
    def certificate(self) -> x509.Certificate:
        return x509.load_pem_x509_certificate(self.cert_pem.encode("ascii"))


def _aware(now: datetime) -> datetime:
    if now.tzinfo is None:
        raise ValueError("Certificate times need a timezone-aware datetime.")
    return now


def _key_usage(*bits: str) -> x509.KeyUsage:
    names = ("digital_signature", "content_commitment", "key_encipherment",
             "data_encipherment", "key_agreement", "key_cert_sign", "crl_sign",
             "encipher_only", "decipher_only")
    return x509.KeyUsage(**{name: name in bits for name in names})


def create_authority(name: str, now: datetime, operator: str | None = None) -> StationAuthority:
    """A self-signed root for this station, valid 20 years, that may only sign certificates."""
    now = _aware(now)
    key = ec.generate_private_key(ec.SECP256R1())
    attributes = [x509.NameAttribute(NameOID.COMMON_NAME, f"{name} certificate authority")]
    if operator:
        attributes.append(x509.NameAttribute(NameOID.ORGANIZATION_NAME, operator))
    subject = x509.Name(attributes)
    cert = (
        x509.CertificateBuilder()
        .subject_name(subject)
        .issuer_name(subject)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - AUTHORITY_LEAD)
        .not_valid_after(now + AUTHORITY_VALIDITY)
        .add_extension(x509.BasicConstraints(ca=True, path_length=0), critical=True)
        .add_extension(_key_usage("key_cert_sign", "crl_sign"), critical=True)
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(key.public_key()),
                       critical=False)
        .sign(key, hashes.SHA256())
    )
    return StationAuthority(cert=cert, key=key)


def save_authority(authority: StationAuthority, folder: Path, passphrase: bytes) -> None:
    """Write the certificate and the passphrase-encrypted key (readable by the owner only)."""
    _save_key_and_certificate(authority.key, authority.cert, folder, passphrase,
                              KEY_FILE, CERT_FILE)


def _save_key_and_certificate(key: SigningKey, cert: x509.Certificate,
                              folder: Path, passphrase: bytes, key_name: str,
                              cert_name: str) -> None:
    """A key encrypted under the passphrase, readable by the owner only, and its certificate."""
    folder.mkdir(parents=True, exist_ok=True)
    key_pem = key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                                serialization.BestAvailableEncryption(passphrase))
    key_path = folder / key_name
    descriptor = os.open(key_path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    with os.fdopen(descriptor, "wb") as handle:
        handle.write(key_pem)
    os.chmod(key_path, 0o600)  # os.open keeps the mode of a file that already existed
    (folder / cert_name).write_bytes(cert.public_bytes(serialization.Encoding.PEM))


def load_authority(folder: Path, passphrase: bytes) -> StationAuthority:
    """Read the authority back; a wrong passphrase raises ValueError."""
    key = serialization.load_pem_private_key((folder / KEY_FILE).read_bytes(), passphrase)
    if not isinstance(key, ec.EllipticCurvePrivateKey):
        raise ValueError("The authority key is not an EC key.")
    cert = x509.load_pem_x509_certificate((folder / CERT_FILE).read_bytes())
    return StationAuthority(cert=cert, key=key)


def check_pin(pin: str) -> None:
    """Refuse a PIN that is not at least six digits."""
    if not (pin.isascii() and pin.isdigit()):
        raise PinProblem("A signing PIN is made of digits only (0-9).")
    if len(pin) < MIN_PIN_DIGITS:
        raise PinProblem(f"A signing PIN needs at least {MIN_PIN_DIGITS} digits.")


def _pin_key(pin: str, salt: bytes, time_cost: int, memory_cost: int, parallelism: int) -> bytes:
    return hash_secret_raw(pin.encode("utf-8"), salt, time_cost=time_cost,
                           memory_cost=memory_cost, parallelism=parallelism, hash_len=32,
                           type=Type.ID)


SigningKey = ec.EllipticCurvePrivateKey | rsa.RSAPrivateKey
SIGNING_KEY_BITS = 3072


def new_signing_key() -> rsa.RSAPrivateKey:
    return rsa.generate_private_key(public_exponent=65537, key_size=SIGNING_KEY_BITS)


def seal_key(private_key: SigningKey, pin: str) -> SealedKey:
    """Encrypt the key's PKCS#8 DER under a key derived from the PIN, with a fresh salt."""
    salt, nonce = secrets.token_bytes(16), secrets.token_bytes(12)
    der = private_key.private_bytes(serialization.Encoding.DER,
                                    serialization.PrivateFormat.PKCS8,
                                    serialization.NoEncryption())
    wrapping = _pin_key(pin, salt, TIME_COST, MEMORY_COST_KIB, PARALLELISM)
    return SealedKey(salt=salt, nonce=nonce,
                     ciphertext=AESGCM(wrapping).encrypt(nonce, der, SCHEME.encode()))


def _unseal_der(sealed: SealedKey, pin: str) -> bytes:
    wrapping = _pin_key(pin, sealed.salt, sealed.time_cost, sealed.memory_cost,
                        sealed.parallelism)
    try:
        return AESGCM(wrapping).decrypt(sealed.nonce, sealed.ciphertext, SCHEME.encode())
    except InvalidTag:
        # GCM's tag cannot tell a wrong PIN from an altered ciphertext; both mean "no key".
        raise WrongPin("That signing PIN is not right.") from None


def unseal_key(sealed: SealedKey, pin: str) -> SigningKey:
    """The private key back (RSA, or EC for one enrolled before RSA), or WrongPin."""
    key = serialization.load_der_private_key(_unseal_der(sealed, pin), password=None)
    if not isinstance(key, (ec.EllipticCurvePrivateKey, rsa.RSAPrivateKey)):
        raise ValueError("The sealed key is not an RSA or EC key.")
    return key


def _signed_by(authority: StationAuthority, builder: x509.CertificateBuilder,
               key: SigningKey) -> x509.Certificate:
    """The certificate signed by the station's CA, with the key identifiers that link it to
    its issuer (RFC 5280 4.2.1.1-2)."""
    authority_ski = authority.cert.extensions.get_extension_for_class(
        x509.SubjectKeyIdentifier).value
    return (
        builder
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(key.public_key()),
                       critical=False)
        .add_extension(
            x509.AuthorityKeyIdentifier.from_issuer_subject_key_identifier(authority_ski),
            critical=False)
        .sign(authority.key, hashes.SHA256())
    )


def issue_person_certificate(
    authority: StationAuthority, *, full_name: str, username: str,
    authorisation: str | None, now: datetime,
) -> tuple[rsa.RSAPrivateKey, x509.Certificate]:
    """A fresh RSA key and a 3-year signing certificate that names the person.

    Subject: CN = full name (what a PDF reader shows), UID = station username (unique
    even when two people share a name), serialNumber = authorisation number when the
    person holds one. serialNumber is X.520's attribute for an identifier of the
    subject itself, so readers show it as part of the name, unlike a free-text OU.
    """
    now = _aware(now)
    key = new_signing_key()
    attributes = [x509.NameAttribute(NameOID.COMMON_NAME, full_name),
                  x509.NameAttribute(NameOID.USER_ID, username)]
    if authorisation:
        attributes.append(x509.NameAttribute(NameOID.SERIAL_NUMBER, authorisation))
    builder = (
        x509.CertificateBuilder()
        .subject_name(x509.Name(attributes))
        .issuer_name(authority.cert.subject)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now)
        .not_valid_after(now + PERSON_VALIDITY)
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        # RFC 5280 §4.2.1.3: digitalSignature + nonRepudiation (contentCommitment) for
        # signatures that commit the signer to the content of the record.
        .add_extension(_key_usage("digital_signature", "content_commitment"), critical=True)
    )
    if authority.crl_url:
        builder = builder.add_extension(distribution_point(authority.crl_url), critical=False)
    cert = _signed_by(authority, builder, key)
    return key, cert


def distribution_point(url: str) -> x509.CRLDistributionPoints:
    """The extension naming where the revocation list is published (RFC 5280 4.2.1.13)."""
    return x509.CRLDistributionPoints([x509.DistributionPoint(
        full_name=[x509.UniformResourceIdentifier(url)], relative_name=None, reasons=None,
        crl_issuer=None)])


def enrol_signer(
    authority: StationAuthority, *, full_name: str, username: str,
    authorisation: str | None, pin: str, now: datetime,
) -> Enrolment:
    """Check the PIN, issue the certificate and keep the key only sealed under the PIN."""
    check_pin(pin)
    key, cert = issue_person_certificate(authority, full_name=full_name, username=username,
                                         authorisation=authorisation, now=now)
    cert_pem = cert.public_bytes(serialization.Encoding.PEM).decode("ascii")
    return Enrolment(cert_pem=cert_pem, sealed=seal_key(key, pin))


def asn1_certificate(cert: x509.Certificate) -> asn1_x509.Certificate:
    """The same certificate as pyHanko's asn1crypto wants it (e.g. for trust roots)."""
    return asn1_x509.Certificate.load(cert.public_bytes(serialization.Encoding.DER))


def signer_for(enrolment: Enrolment, pin: str,
               authority_cert: x509.Certificate) -> signers.SimpleSigner:
    """A pyHanko signer for this person, unlocked by their PIN (WrongPin otherwise)."""
    der = _unseal_der(enrolment.sealed, pin)
    cert = enrolment.certificate
    key = serialization.load_der_private_key(der, password=None)
    if key.public_key() != cert.public_key():
        raise ValueError("The sealed key does not belong to this certificate.")
    return signers.SimpleSigner(
        signing_cert=asn1_certificate(cert), signing_key=asn1_keys.PrivateKeyInfo.load(der),
        cert_registry=SimpleCertificateStore.from_certs([asn1_certificate(authority_cert)]))
