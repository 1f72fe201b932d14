"""The station's time-stamp unit: RFC 3161 time-stamp tokens for every record signature
(PAdES B-T), from a key and certificate of its own.

A signature's own signing time is only the signer's word. A time-stamp token is a second,
independent signature over the signature's value that says when it existed; validators
check a certificate's validity and revocation at that time. The unit's key is neither the
authority's nor any person's, and its certificate from the station's authority allows only
time-stamping (RFC 3161 2.3: the extended key usage id-kp-timeStamping, critical, and no
other). The token's time is the station's clock at signing, the same instant the stamp
prints.
"""

from __future__ import annotations

import secrets
from dataclasses import dataclass
from datetime import datetime

from asn1crypto import algos, cms, core, tsp
from asn1crypto import x509 as asn1_x509
from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import padding, rsa
from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID
from pyhanko.sign.general import as_signing_certificate_v2, simple_cms_attribute
from pyhanko.sign.timestamps.api import TimeStamper

from .identity import (
    StationAuthority,
    _key_usage,
    _signed_by,
    asn1_certificate,
    distribution_point,
    new_signing_key,
)

KEY_FILE = "time-stamp-key.pem"
CERT_FILE = "time-stamp-cert.pem"
# The unit's policy (RFC 3161 2.4.2 needs one): an OID from a UUID under the 2.25 arc
# (ITU-T X.667), which needs no registration; what it means is written here: tokens are
# issued only for the station's own record signatures, with the station's clock.
POLICY = "2.25.184301587412869734119584637912011938211"


@dataclass(frozen=True)
class TimeStampUnit:
    cert: x509.Certificate
    key: rsa.RSAPrivateKey   # RSA, as the signing keys are (see identity: PDF 1.7 records)


def issue_time_stamp_unit(authority: StationAuthority, name: str) -> TimeStampUnit:
    """A fresh key and a certificate that allows time-stamping only, valid for as long as the
    authority is (tokens made at any time of the station's history must check out)."""
    key = new_signing_key()
    builder = (
        x509.CertificateBuilder()
        .subject_name(x509.Name([x509.NameAttribute(NameOID.COMMON_NAME,
                                                    f"{name} time-stamp unit")]))
        .issuer_name(authority.cert.subject)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(authority.cert.not_valid_before_utc)
        .not_valid_after(authority.cert.not_valid_after_utc)
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        .add_extension(_key_usage("digital_signature", "content_commitment"), critical=True)
        .add_extension(x509.ExtendedKeyUsage([ExtendedKeyUsageOID.TIME_STAMPING]),
                       critical=True)
    )
    if authority.crl_url:
        builder = builder.add_extension(distribution_point(authority.crl_url), critical=False)
    return TimeStampUnit(cert=_signed_by(authority, builder, key), key=key)


class StationTimeStamper(TimeStamper):
    """pyHanko's time-stamp client, answered in-process by the station's unit at `at`."""

    def __init__(self, unit: TimeStampUnit, authority_cert: x509.Certificate,
                 at: datetime) -> None:
        super().__init__(include_nonce=True)
        self._unit = unit
        self._cert = asn1_certificate(unit.cert)
        self._authority = asn1_certificate(authority_cert)
        self._at = at

    async def async_request_tsa_response(self, req: tsp.TimeStampReq) -> tsp.TimeStampResp:
        return answer(self._unit, self._cert, self._authority, req, self._at)


def answer(unit: TimeStampUnit, cert: asn1_x509.Certificate,
           authority: asn1_x509.Certificate, req: tsp.TimeStampReq,
           at: datetime) -> tsp.TimeStampResp:
    """The unit's RFC 3161 response to one request: a token over its message imprint."""
    imprint: tsp.MessageImprint = req["message_imprint"]
    digest = imprint["hash_algorithm"]["algorithm"].native
    if digest not in ("sha256", "sha384", "sha512"):
        return tsp.TimeStampResp({"status": tsp.PKIStatusInfo({
            "status": tsp.PKIStatus("rejection"),
            "fail_info": tsp.PKIFailureInfo({"bad_alg"})})})
    info = {"version": "v1", "policy": tsp.ObjectIdentifier(POLICY),
            "message_imprint": imprint, "serial_number": secrets.randbits(63),
            "gen_time": core.GeneralizedTime(at),
            "tsa": asn1_x509.GeneralName(name="directory_name", value=cert.subject)}
    if req["nonce"].native is not None:
        info["nonce"] = req["nonce"]
    tst_info = tsp.TSTInfo(info).dump()
    signed_attrs = cms.CMSAttributes([
        simple_cms_attribute("content_type", "tst_info"),
        simple_cms_attribute("signing_time", cms.Time({"utc_time": core.UTCTime(at)})),
        # RFC 5816: the ESS signing-certificate-v2 attribute binds the unit's certificate.
        simple_cms_attribute("signing_certificate_v2", as_signing_certificate_v2(cert)),
        simple_cms_attribute("message_digest", _sha256(tst_info)),
    ])
    signature = unit.key.sign(signed_attrs.dump(), padding.PKCS1v15(), hashes.SHA256())
    signer_info = cms.SignerInfo({
        "version": "v1",
        "sid": cms.SignerIdentifier({"issuer_and_serial_number": cms.IssuerAndSerialNumber(
            {"issuer": cert.issuer, "serial_number": cert.serial_number})}),
        "digest_algorithm": algos.DigestAlgorithm({"algorithm": "sha256"}),
        "signature_algorithm": algos.SignedDigestAlgorithm({"algorithm": "sha256_rsa"}),
        "signed_attrs": signed_attrs, "signature": signature})
    signed_data = cms.SignedData({
        "version": "v3",
        "digest_algorithms": cms.DigestAlgorithms([algos.DigestAlgorithm(
            {"algorithm": "sha256"})]),
        "encap_content_info": cms.EncapsulatedContentInfo({
            "content_type": "tst_info", "content": cms.ParsableOctetString(tst_info)}),
        "certificates": [cert, authority],
        "signer_infos": [signer_info]})
    token = cms.ContentInfo({"content_type": "signed_data", "content": signed_data})
    return tsp.TimeStampResp({"status": tsp.PKIStatusInfo({"status": tsp.PKIStatus("granted")}),
                              "time_stamp_token": token})


def _sha256(data: bytes) -> bytes:
    digest = hashes.Hash(hashes.SHA256())
    digest.update(data)
    return digest.finalize()


def save_unit(unit: TimeStampUnit, folder, passphrase: bytes) -> None:
    from .identity import _save_key_and_certificate
    _save_key_and_certificate(unit.key, unit.cert, folder, passphrase, KEY_FILE, CERT_FILE)


def load_unit(folder, passphrase: bytes) -> TimeStampUnit | None:
    """The unit kept beside the authority, or None when this station has none yet."""
    if not (folder / CERT_FILE).is_file():
        return None
    key = serialization.load_pem_private_key((folder / KEY_FILE).read_bytes(), passphrase)
    if not isinstance(key, rsa.RSAPrivateKey):
        return None   # a unit from before RSA: the station issues a new one
    return TimeStampUnit(cert=x509.load_pem_x509_certificate((folder / CERT_FILE).read_bytes()),
                         key=key)
