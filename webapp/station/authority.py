"""The station's certificate authority: made at `init`, kept protected in the instance folder.

Its key is encrypted under a passphrase kept beside the database (mode 0600), so a
copied database alone holds no usable key; people's keys are sealed under their PINs.
"""

from __future__ import annotations

import ipaddress
import os
import secrets
import socket
import threading
from collections.abc import Iterable
from dataclasses import dataclass, replace
from datetime import UTC, datetime
from pathlib import Path

from cryptography import x509

from .. import store
from ..records import revocation, timestamping
from ..records.identity import (
    CERT_FILE,
    StationAuthority,
    create_authority,
    load_authority,
    save_authority,
)
from ..records.server_identity import (
    SERVER_CERT_FILE,
    SERVER_KEY_FILE,
    ServerNameProblem,
    issue_server_certificate,
    load_server_certificate,
    parse_server_name,
    save_server_identity,
    server_certificate_serves,
)
from ..store import signers

_CACHE: dict[str, StationAuthority] = {}
_LOCK = threading.Lock()


def authority_folder(db_path: str | Path) -> Path:
    path = Path(db_path)
    return path.with_name(path.name + ".authority")


def _passphrase(folder: Path) -> bytes:
    secret = folder / "passphrase"
    if not secret.is_file():
        folder.mkdir(parents=True, exist_ok=True)
        folder.chmod(0o700)
        secret.write_text(secrets.token_urlsafe(32))
        secret.chmod(0o600)
    return secret.read_text().strip().encode()


def station_authority(db_path: str | Path, station_name: str, now: datetime) -> StationAuthority:
    """The station's CA, created on first use; loaded once per process."""
    folder = authority_folder(db_path)
    key = str(folder.resolve())
    with _LOCK:
        if key in _CACHE:
            return _CACHE[key]
        passphrase = _passphrase(folder)
        if (folder / "authority-cert.pem").is_file():
            authority = load_authority(folder, passphrase)
        else:
            authority = create_authority(station_name, now)
            save_authority(authority, folder, passphrase)
        authority = replace(authority, crl_url=_crl_url(folder))
        unit = timestamping.load_unit(folder, passphrase)
        if unit is None:   # a new station, or one from before the unit existed
            unit = timestamping.issue_time_stamp_unit(authority, station_name)
            timestamping.save_unit(unit, folder, passphrase)
        authority = replace(authority, time_stamps=unit)
        _CACHE[key] = authority
        return authority


def _crl_url(folder: Path) -> str:
    """Where the station publishes its revocation list: fixed when the authority is made (a
    certificate names it for life), from SPARKWARD_PUBLIC_URL or the machine's LAN name."""
    kept = folder / "crl-url"
    if not kept.is_file():
        base = os.environ.get("SPARKWARD_PUBLIC_URL") or (
            f"http://{socket.gethostname().lower()}.local:8000")
        kept.write_text(base.rstrip("/") + revocation.LIST_PATH)
    return kept.read_text().strip()


def current_revocation_list(db: store.Database, authority: StationAuthority,
                            now: datetime) -> x509.CertificateRevocationList:
    """The station's revocation list as of now, from the signers its database has revoked
    (the database stays the one source; the list is how it is said to any validator)."""
    revoked = []
    for row in signers.revoked_signers(db):
        at = datetime.fromisoformat(str(row["revoked_at"]))
        revoked.append((x509.load_pem_x509_certificate(str(row["cert_pem"]).encode()),
                        at if at.tzinfo else at.replace(tzinfo=UTC)))
    return revocation.revocation_list(authority, revoked, now)


@dataclass(frozen=True)
class StationTls:
    """What the HTTPS server loads: the station's server certificate and key, kept beside the CA."""

    cert_file: Path
    key_file: Path
    key_password: bytes
    certificate: x509.Certificate
    authority_cert: x509.Certificate
    authority_file: Path
    issued: bool  # a new certificate was issued just now (else the kept one serves)


def station_tls(db_path: str | Path, station_name: str, names: Iterable[str],
                now: datetime) -> StationTls:
    """The station's TLS server certificate for these DNS names and IP addresses: the kept one
    while it is valid 30 more days and names them all, else a new one from the station's CA.
    A name that is neither raises ServerNameProblem before anything is written."""
    dns_names: list[str] = []
    addresses: list[ipaddress.IPv4Address | ipaddress.IPv6Address] = []
    for text in names:
        name = parse_server_name(text)
        if isinstance(name, str):
            dns_names += [] if name in dns_names else [name]
        elif name not in addresses:
            addresses.append(name)
    if not dns_names and not addresses:
        raise ServerNameProblem("The station's certificate needs at least one name or address.")
    authority = station_authority(db_path, station_name, now)
    folder = authority_folder(db_path)
    passphrase = _passphrase(folder)
    with _LOCK:
        kept = load_server_certificate(folder, passphrase)
        if kept is not None and server_certificate_serves(
                kept, authority.cert, dns_names=dns_names, ip_addresses=addresses, now=now):
            issued = False
        else:
            key, kept = issue_server_certificate(authority, dns_names=dns_names,
                                                 ip_addresses=addresses, now=now)
            save_server_identity(key, kept, folder, passphrase)
            issued = True
    return StationTls(cert_file=folder / SERVER_CERT_FILE, key_file=folder / SERVER_KEY_FILE,
                      key_password=passphrase, certificate=kept, authority_cert=authority.cert,
                      authority_file=folder / CERT_FILE, issued=issued)


def lan_names(listen_host: str, extra: Iterable[str] = ()) -> list[str]:
    """The names and addresses tablets may use to reach this machine, found without sending
    anything: localhost, the loopback addresses, the host name (and its .local form for
    mDNS), the addresses the machine would send from, the address listened on, and `extra`."""
    names = ["localhost", "127.0.0.1", "::1"]
    host_name = socket.gethostname()
    if _valid_name(host_name) and "." not in host_name:
        names += [host_name.lower(), f"{host_name.lower()}.local"]
    elif _valid_name(host_name):
        names.append(host_name.lower())
    names += _own_addresses(host_name)
    if listen_host not in ("", "0.0.0.0", "::") and _valid_name(listen_host):
        names.append(listen_host)
    names += list(extra)
    return list(dict.fromkeys(names))


def _valid_name(text: str) -> bool:
    try:
        parse_server_name(text)
    except ServerNameProblem:
        return False
    return True


def _own_addresses(host_name: str) -> list[str]:
    found: list[str] = []
    # A UDP socket's connect sends no packet; it only asks the routing table which address
    # would be used (TEST-NET and documentation addresses, RFC 5737 and RFC 3849).
    for family, probe in ((socket.AF_INET, "192.0.2.1"), (socket.AF_INET6, "2001:db8::1")):
        try:
            with socket.socket(family, socket.SOCK_DGRAM) as udp:
                udp.connect((probe, 9))
                found.append(udp.getsockname()[0])
        except OSError:
            pass  # no route of that family: not on a LAN that way
    try:
        found += [str(info[4][0]) for info in socket.getaddrinfo(host_name, None)]
    except OSError:
        pass
    usable = []
    for text in found:
        try:
            address = ipaddress.ip_address(text)
        except ValueError:
            continue
        if not (address.is_loopback or address.is_link_local or address.is_unspecified):
            usable.append(str(address))
    return usable
