"""The station's certificate revocation list (RFC 5280 5), made from its database.

The database says whose signing access ended and when; the list says it in the form any
validator understands. Every person certificate (and the time-stamp unit's) names where the
station publishes the list (its CRL distribution point); every record embeds the list
current at signing in its document security store (PAdES B-LT), so a validator needs
nothing from the network: a signature time-stamped before a person's revocation stays
valid, one time-stamped after it does not.
"""

from __future__ import annotations

from collections.abc import Iterable
from datetime import datetime, timedelta

from cryptography import x509
from cryptography.hazmat.primitives import hashes

from .identity import StationAuthority

# How long a list is current: a validator checking today wants a list newer than this.
# The station makes a new one for every signature and on every fetch, so a day is ample.
LIST_VALIDITY = timedelta(days=1)
LIST_PATH = "/station-ca.crl"


def revocation_list(authority: StationAuthority,
                    revoked: Iterable[tuple[x509.Certificate, datetime]],
                    now: datetime) -> x509.CertificateRevocationList:
    """The list as of `now`: each revoked certificate by serial number, with when its
    holder's access ended. Its number grows with time, as RFC 5280 5.2.3 asks."""
    authority_ski = authority.cert.extensions.get_extension_for_class(
        x509.SubjectKeyIdentifier).value
    builder = (
        x509.CertificateRevocationListBuilder()
        .issuer_name(authority.cert.subject)
        .last_update(now)
        .next_update(now + LIST_VALIDITY)
        .add_extension(x509.CRLNumber(int(now.timestamp() * 1000)), critical=False)
        .add_extension(
            x509.AuthorityKeyIdentifier.from_issuer_subject_key_identifier(authority_ski),
            critical=False)
    )
    for cert, at in revoked:
        if at > now:
            continue
        builder = builder.add_revoked_certificate(
            x509.RevokedCertificateBuilder().serial_number(cert.serial_number)
            .revocation_date(at).build())
    return builder.sign(authority.key, hashes.SHA256())
