"""The station's own TLS server certificate for the hangar LAN, issued by the station's
authority, so tablets that trust the authority get a secure origin (a service worker
needs one)."""

from __future__ import annotations

import ipaddress
import re
from collections.abc import Sequence
from datetime import datetime, timedelta
from pathlib import Path

from cryptography import x509
from cryptography.exceptions import InvalidSignature
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID

from .identity import (
    StationAuthority,
    _aware,
    _key_usage,
    _save_key_and_certificate,
    _signed_by,
)

# The station's own TLS certificate, so tablets on the hangar LAN get a secure origin (a
# service worker needs one). Browsers read only the SubjectAlternativeName; Apple's rules
# for TLS server certificates (support.apple.com HT210176, from memory) ask for SANs, the
# serverAuth EKU and at most 825 days; 397 days also keeps within the CA/Browser Forum's
# 398-day cap, should a browser ever apply it to a private root.
SERVER_VALIDITY = timedelta(days=397)
SERVER_RENEWAL_MARGIN = timedelta(days=30)
SERVER_KEY_FILE = "server-key.pem"
SERVER_CERT_FILE = "server-cert.pem"
_DNS_LABEL = re.compile(r"[a-z0-9]([a-z0-9-]{0,61}[a-z0-9])?")

IPAddress = ipaddress.IPv4Address | ipaddress.IPv6Address


class ServerNameProblem(ValueError):
    """A name given for the station's TLS certificate is neither a DNS name nor an IP address."""


def parse_server_name(text: str) -> str | IPAddress:
    """A DNS name (lower case) or an IP address the tablets type to reach the station."""
    name = text.strip()
    if not name:
        raise ServerNameProblem("An empty name cannot go in the station's certificate.")
    if "://" in name or "/" in name:
        raise ServerNameProblem(f"{text!r}: give the name or address alone, without "
                                "https:// or a path (for example station.hangar.lan).")
    bare = name[1:-1] if name.startswith("[") and name.endswith("]") else name
    try:
        address = ipaddress.ip_address(bare)
    except ValueError:
        pass
    else:
        if isinstance(address, ipaddress.IPv6Address) and address.scope_id:
            raise ServerNameProblem(f"{text!r}: an address with a zone (%...) cannot go in a "
                                    "certificate; give the address without it.")
        return address
    if ":" in name:
        raise ServerNameProblem(f"{text!r} is not a valid IP address, and a DNS name has no "
                                "':' (give the port with --port, not in the name).")
    if name.startswith("*"):
        raise ServerNameProblem(f"{text!r}: wildcard names are not accepted; give each name "
                                "the tablets use.")
    if not name.isascii():
        raise ServerNameProblem(f"{text!r}: write an international name in its ASCII "
                                "(xn--...) form.")
    dns = name.lower().removesuffix(".")
    labels = dns.split(".")
    if len(dns) > 253 or not all(_DNS_LABEL.fullmatch(label) for label in labels):
        raise ServerNameProblem(f"{text!r} is not a valid DNS name: use letters, digits and "
                                "hyphens, in dot-separated parts of 1 to 63 characters.")
    if labels[-1].isdigit():
        raise ServerNameProblem(f"{text!r} looks like an IP address but is not a valid one.")
    return dns


def issue_server_certificate(
    authority: StationAuthority, *, dns_names: Sequence[str],
    ip_addresses: Sequence[IPAddress], now: datetime,
) -> tuple[ec.EllipticCurvePrivateKey, x509.Certificate]:
    """A fresh key and a 397-day TLS server certificate for these names, from the station CA."""
    now = _aware(now)
    if not dns_names and not ip_addresses:
        raise ServerNameProblem("The station's certificate needs at least one name or address.")
    key = ec.generate_private_key(ec.SECP256R1())
    common_name = dns_names[0] if dns_names else str(ip_addresses[0])
    alternative_names: list[x509.GeneralName] = [x509.DNSName(name) for name in dns_names]
    alternative_names += [x509.IPAddress(address) for address in ip_addresses]
    builder = (
        x509.CertificateBuilder()
        .subject_name(x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, common_name)]))
        .issuer_name(authority.cert.subject)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - timedelta(minutes=5))  # a tablet's clock a little behind
        .not_valid_after(now + SERVER_VALIDITY)
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        # RFC 5280 §4.2.1.3 / RFC 8446: an ECDHE-ECDSA server key only signs the handshake.
        .add_extension(_key_usage("digital_signature"), critical=True)
        .add_extension(x509.ExtendedKeyUsage([ExtendedKeyUsageOID.SERVER_AUTH]),
                       critical=False)
        .add_extension(x509.SubjectAlternativeName(alternative_names), critical=False)
    )
    cert = _signed_by(authority, builder, key)
    return key, cert


def server_certificate_serves(
    cert: x509.Certificate, authority_cert: x509.Certificate, *, dns_names: Sequence[str],
    ip_addresses: Sequence[IPAddress], now: datetime,
) -> bool:
    """Whether a kept server certificate can go on serving: issued by this station's CA, valid
    for at least 30 more days, and naming every name and address asked for."""
    now = _aware(now)
    try:
        cert.verify_directly_issued_by(authority_cert)
        names = cert.extensions.get_extension_for_class(x509.SubjectAlternativeName).value
    except (ValueError, TypeError, InvalidSignature, x509.ExtensionNotFound):
        return False
    if not cert.not_valid_before_utc <= now <= cert.not_valid_after_utc - SERVER_RENEWAL_MARGIN:
        return False
    return (set(dns_names) <= set(names.get_values_for_type(x509.DNSName))
            and set(ip_addresses) <= set(names.get_values_for_type(x509.IPAddress)))


def save_server_identity(key: ec.EllipticCurvePrivateKey, cert: x509.Certificate,
                         folder: Path, passphrase: bytes) -> None:
    """Write the server certificate and its key, encrypted like the authority's (mode 0600)."""
    _save_key_and_certificate(key, cert, folder, passphrase, SERVER_KEY_FILE, SERVER_CERT_FILE)


def load_server_certificate(folder: Path, passphrase: bytes) -> x509.Certificate | None:
    """The kept server certificate, or None when it is missing, unreadable or its key does not
    open with the passphrase or does not match it (then a new one is issued)."""
    try:
        cert = x509.load_pem_x509_certificate((folder / SERVER_CERT_FILE).read_bytes())
        key = serialization.load_pem_private_key((folder / SERVER_KEY_FILE).read_bytes(),
                                                 passphrase)
    except (OSError, ValueError, TypeError):
        return None
    if key.public_key() != cert.public_key():
        return None
    return cert


def certificate_fingerprint(cert: x509.Certificate) -> str:
    """The certificate's SHA-256 fingerprint as tablets show it: hex pairs joined by colons."""
    return cert.fingerprint(hashes.SHA256()).hex(":").upper()
