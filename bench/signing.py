"""Bench: one more signature on a record, against how many the record already carries.

Each signature is an incremental update of the same PDF: the signature (certifying for the
first), its RFC 3161 time-stamp, then the authority and the revocation list in the document
security store and a document time-stamp (PAdES B-LT/LTA). A record that is returned or
amended keeps growing, so this bench signs one record again and again (fields reserved
for up to N signatures) and measures, at several points of its history:

  sign     adding the next signature (pyHanko: read the file, diff nothing, write the
           update, time-stamp, embed validation data, document time-stamp)
  verify   checking every signature of the file (what `sparkward verify` does)
  size     the file's size

each printed against the first signature's (ratio 1 = does not grow). Signing is expected
to grow slowly (pyHanko reads the whole file), verifying with the number of signatures.

    .venv/bin/python bench/signing.py [--signatures 1 4 8 16]
"""

from __future__ import annotations

import argparse
import statistics
import sys
from datetime import UTC, datetime, timedelta

from measuring import timed  # bench/ is on sys.path when a bench runs

from webapp.records import identity, revocation, timestamping
from webapp.records.signing import StampBox, ValidationData, sign_record, verify_record
from webapp.records.stamp_style import stamp_font


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--signatures", type=int, nargs="+", default=[1, 4, 8, 16])
    args = parser.parse_args()
    most = max(args.signatures)
    from weasyprint import HTML

    now = datetime(2026, 12, 1, 8, 0, tzinfo=UTC)
    authority = identity.create_authority("Bench station", now)
    unit = timestamping.issue_time_stamp_unit(authority, "Bench station")
    key, cert = identity.issue_person_certificate(
        authority, full_name="Bench Signer", username="bench", authorisation="B-1", now=now)
    from asn1crypto import keys as asn1_keys
    from cryptography.hazmat.primitives import serialization
    from pyhanko.sign import signers
    from pyhanko_certvalidator.registry import SimpleCertificateStore

    signer = signers.SimpleSigner(
        signing_cert=identity.asn1_certificate(cert),
        signing_key=asn1_keys.PrivateKeyInfo.load(key.private_bytes(
            serialization.Encoding.DER, serialization.PrivateFormat.PKCS8,
            serialization.NoEncryption())),
        cert_registry=SimpleCertificateStore.from_certs(
            [identity.asn1_certificate(authority.cert)]))
    boxes = {f"s{i}": StampBox(0, (40, 800 - 40 * i, 300, 830 - 40 * i)) for i in range(most)}
    pdf = HTML(string="<h1>Bench record</h1>" + "<p>Line of the record.</p>" * 200).write_pdf()
    stamp_font()   # loaded once per process (the station does it at start-up)
    rows = []
    for i in range(most):
        at = now + timedelta(minutes=i)
        crl = revocation.revocation_list(authority, [], at)
        validation = ValidationData(authority.cert,
                                    (crl.public_bytes(serialization.Encoding.DER),), at)
        holder: dict[str, bytes] = {}

        def sign(current=pdf, i=i, at=at, validation=validation, holder=holder) -> None:
            holder["pdf"] = sign_record(
                current, signer, field_name=f"s{i}", meaning="Bench", signer_name="Bench",
                stamp="Bench", reserve=boxes if i == 0 else None, signed_at=at,
                timestamper=timestamping.StationTimeStamper(unit, authority.cert, at),
                validation=validation)

        sign_s = timed(sign)
        pdf = holder["pdf"]
        if i + 1 in args.signatures:
            verify_s = statistics.median(
                timed(lambda signed=pdf: verify_record(signed, authority.cert))
                for _ in range(3))
            rows.append((i + 1, sign_s, verify_s, len(pdf)))
    first = rows[0]
    print(f"{'signatures':>10} {'sign s':>8} {'×':>6} {'verify s':>9} {'×':>6} "
          f"{'size kB':>8} {'×':>6}")
    for n, sign_s, verify_s, size in rows:
        print(f"{n:>10} {sign_s:>8.3f} {sign_s / first[1]:>6.2f} {verify_s:>9.3f} "
              f"{verify_s / first[2]:>6.2f} {size / 1024:>8.0f} {size / first[3]:>6.2f}")


if __name__ == "__main__":
    sys.path.insert(0, str(__import__("pathlib").Path(__file__).resolve().parent))
    main()
