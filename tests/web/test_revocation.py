"""Revocation as any validator understands it: the station publishes a CRL made from its
database, every person certificate names where; each record embeds the list current at
signing (PAdES B-LT). Sign, revoke, sign again: the earlier signature stays valid in
pyHanko's own AdES long-term validation with revocation checking required, the later one is
refused by the station and, forced into a file with the revoked key, fails that validation.

Sources: RFC 5280 4.2.1.13 (CRL distribution points) and 5 (CRL); ETSI EN 319 102-1 5.6.3
(validation with long-term data, as pyHanko's ades_lta_validation implements it)."""

from __future__ import annotations

import asyncio
import io
from datetime import timedelta

import pytest
from asn1crypto.crl import CertificateList
from cryptography import x509
from pyhanko.pdf_utils.reader import PdfFileReader
from pyhanko.sign.ades.report import AdESPassed
from pyhanko.sign.validation import ades
from pyhanko.sign.validation.policy_decl import (
    LocalKnowledge,
    PdfSignatureValidationSpec,
    SignatureValidationSpec,
)
from pyhanko_certvalidator.context import CertValidationPolicySpec
from pyhanko_certvalidator.ltv.types import ValidationTimingInfo
from pyhanko_certvalidator.policy_decl import (
    CertRevTrustPolicy,
    RevocationCheckingPolicy,
    RevocationCheckingRule,
)
from pyhanko_certvalidator.registry import SimpleTrustManager
from pyhanko_certvalidator.revinfo.archival import CRLContainer

from tests.conftest import DEMO_PINS
from tests.web.jobs import Job, _event
from webapp.records import identity, signing
from webapp.records.identity import asn1_certificate
from webapp.records.timestamping import StationTimeStamper
from webapp.records.verify import check_record, revocations
from webapp.station.authority import station_authority
from webapp.store import jobs, people, signers


@pytest.fixture
def authority(db_path, clock):
    return station_authority(db_path, "Test station", clock())


def _lta_verdicts(pdf: bytes, ca: x509.Certificate, at, fetched: bytes | None = None) -> list:
    """pyHanko's AdES long-term validation of each signature at `at`, a CRL required for
    every certificate: from what the file embeds, and `fetched`, the list a validator gets
    from the distribution point the certificates name (nothing else is fetched)."""
    required = CertRevTrustPolicy(RevocationCheckingPolicy(
        ee_certificate_rule=RevocationCheckingRule.CRL_REQUIRED,
        intermediate_ca_cert_rule=RevocationCheckingRule.CRL_REQUIRED))
    policy = CertValidationPolicySpec(
        trust_manager=SimpleTrustManager.build(trust_roots=[asn1_certificate(ca)]),
        revinfo_policy=required)
    known = LocalKnowledge(known_crls=[CRLContainer(CertificateList.load(fetched))]
                           if fetched else [])
    spec = PdfSignatureValidationSpec(SignatureValidationSpec(
        cert_validation_policy=policy, ts_cert_validation_policy=policy,
        local_knowledge=known))

    def run():
        reader = PdfFileReader(io.BytesIO(pdf))
        timing = ValidationTimingInfo(validation_time=at, best_signature_time=at,
                                           point_in_time_validation=True)
        return [asyncio.run(ades.ades_lta_validation(sig, spec, timing))
                for sig in reader.embedded_signatures
                if sig.sig_object_type == "/Sig"]     # not the document time-stamps
    return signing._off_thread(run)


def test_person_and_time_stamp_certificates_name_the_published_list(authority, login, db,
                                                                    app):
    url = authority.crl_url
    assert url.endswith("/station-ca.crl")
    for pem in [row["cert_pem"] for row in db.query("select cert_pem from signers")]:
        cert = x509.load_pem_x509_certificate(pem.encode())
        points = cert.extensions.get_extension_for_class(x509.CRLDistributionPoints).value
        assert [n.value for p in points for n in p.full_name] == [url]
    answer = app.test_client().get("/station-ca.crl")          # public, like the CA
    assert answer.status_code == 200 and answer.mimetype == "application/pkix-crl"
    crl = x509.load_der_x509_crl(answer.data)
    assert crl.is_signature_valid(authority.cert.public_key())
    assert crl.issuer == authority.cert.subject


def test_sign_revoke_sign_again(mechanic, login, db, clock, authority, tmp_path):
    job = Job(mechanic, db, clock, "exciter-removal")
    job.walk_to("performer")
    job.ok(_event("performer", "signed", pin=DEMO_PINS["mech1"]))
    signed_at = clock()
    before = signers.latest_record(db, job.id)["pdf"]
    [early] = _lta_verdicts(before, authority.cert, signed_at + timedelta(minutes=1))
    assert isinstance(early.ades_subindic, AdESPassed), early.ades_subindic

    # Aino Varga's access ends an hour later.
    clock.advance(3600)
    mech1 = people.person_by_username(db, "mech1")
    people.revoke(db, mech1.id, clock())
    # The published list now names her certificate, from that moment.
    cert = x509.load_pem_x509_certificate(signers.signer(db, mech1.id)["cert_pem"].encode())
    crl = x509.load_der_x509_crl(mechanic.get("/station-ca.crl").data)
    entry = crl.get_revoked_certificate_by_serial_number(cert.serial_number)
    assert entry is not None and entry.revocation_date_utc == clock().replace(microsecond=0)

    # Her earlier signature is still valid a week on, revocation checking required, with the
    # list published then (which names her revocation, after the signature's time-stamp).
    clock.advance(7 * 24 * 3600)
    published = mechanic.get("/station-ca.crl").data
    [still] = _lta_verdicts(before, authority.cert, clock(), published)
    assert isinstance(still.ades_subindic, AdESPassed), still.ades_subindic

    # The station refuses her next signature (her log-in is gone too: try it as the API
    # would see it from an admin-made session is not possible, so through the rule itself).
    clock.advance(60)
    from webapp.station import recording
    refused = recording.record_event(
        db, job.id, event_id="forced-1", kind="signed", step_id="inspector",
        data={"pin": DEMO_PINS["mech1"]}, device_time=None, person=mech1, now=clock(),
        authority=authority)
    assert refused.status != "stored"

    # Forced into a file with her revoked key (pyHanko itself will not embed validation data
    # for a revoked certificate), time-stamped after the revocation: a validator with the
    # published list finds it revoked before the signature existed, and fails it.
    enrolled = signers.signer(db, mech1.id)
    enrolment = identity.Enrolment(cert_pem=enrolled["cert_pem"],
                                   sealed=identity.SealedKey.from_json(enrolled["sealed_key"]))
    key = identity.signer_for(enrolment, DEMO_PINS["mech1"], authority.cert)
    forced = signing.sign_record(
        before, key, field_name="inspector", meaning="Inspected", signer_name="Aino Varga",
        signed_at=clock(), timestamper=StationTimeStamper(authority.time_stamps,
                                                          authority.cert, clock()))
    still_good, late = _lta_verdicts(forced, authority.cert, clock(),
                                     mechanic.get("/station-ca.crl").data)
    assert isinstance(still_good.ades_subindic, AdESPassed)
    assert not isinstance(late.ades_subindic, AdESPassed), late.ades_subindic
    # The station's own check says why, from the time-stamp rather than the claimed time.
    check = check_record(forced, authority.cert, lambda job_id: jobs.events(db, job_id),
                         lambda job_id: signers.stored_states(db, job_id),
                         revocations(signers.revoked_signers(db)))
    assert not check.ok
    assert any("after Aino Varga's signing access was revoked" in p for p in check.problems)
