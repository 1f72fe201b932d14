"""The station's TLS server certificate: from its own CA, for the names asked, renewed in time."""

from __future__ import annotations

import ipaddress
import stat
from datetime import UTC, datetime, timedelta

import pytest
from cryptography import x509
from cryptography.hazmat.primitives import serialization
from cryptography.x509.oid import ExtendedKeyUsageOID

from webapp.records.identity import create_authority
from webapp.records.server_identity import (
    SERVER_KEY_FILE,
    SERVER_VALIDITY,
    ServerNameProblem,
    issue_server_certificate,
    parse_server_name,
    server_certificate_serves,
)
from webapp.station.authority import authority_folder, lan_names, station_authority, station_tls

NOW = datetime(2026, 12, 1, 8, 0, tzinfo=UTC)
DNS = ["localhost", "station.hangar.lan"]
IPS = [ipaddress.ip_address("127.0.0.1"), ipaddress.ip_address("192.168.40.12"),
       ipaddress.ip_address("fd12:3456::12")]


@pytest.fixture(scope="module")
def authority():
    return create_authority("Hangar 3", NOW)


@pytest.fixture(scope="module")
def issued(authority):
    return issue_server_certificate(authority, dns_names=DNS, ip_addresses=IPS, now=NOW)


def test_the_certificate_chains_to_the_station_ca(authority, issued):
    key, cert = issued
    cert.verify_directly_issued_by(authority.cert)
    assert cert.issuer == authority.cert.subject
    assert key.public_key() == cert.public_key()
    other = create_authority("Another station", NOW)
    with pytest.raises(ValueError):  # the issuer name differs: not from this authority
        cert.verify_directly_issued_by(other.cert)


def test_it_is_a_server_certificate_and_not_a_ca(issued):
    _key, cert = issued
    ext = cert.extensions
    assert ext.get_extension_for_class(x509.ExtendedKeyUsage).value == x509.ExtendedKeyUsage(
        [ExtendedKeyUsageOID.SERVER_AUTH])
    constraints = ext.get_extension_for_class(x509.BasicConstraints)
    assert constraints.critical and constraints.value.ca is False
    usage = ext.get_extension_for_class(x509.KeyUsage).value
    assert usage.digital_signature and not usage.key_cert_sign and not usage.content_commitment


def test_it_names_every_dns_name_and_ip_address_asked(issued):
    _key, cert = issued
    names = cert.extensions.get_extension_for_class(x509.SubjectAlternativeName).value
    assert names.get_values_for_type(x509.DNSName) == DNS
    assert names.get_values_for_type(x509.IPAddress) == IPS


def test_it_is_valid_397_days(issued):
    _key, cert = issued
    assert cert.not_valid_before_utc <= NOW
    assert cert.not_valid_after_utc == NOW + SERVER_VALIDITY == NOW + timedelta(days=397)


def test_a_certificate_serves_while_valid_30_more_days_and_naming_all_asked(authority, issued):
    _key, cert = issued
    asked = {"dns_names": DNS, "ip_addresses": IPS}
    assert server_certificate_serves(cert, authority.cert, **asked, now=NOW)
    assert server_certificate_serves(cert, authority.cert, dns_names=["localhost"],
                                     ip_addresses=[], now=NOW)  # fewer names: still covered
    assert server_certificate_serves(cert, authority.cert, **asked,
                                     now=NOW + timedelta(days=367))  # 30 days left
    assert not server_certificate_serves(cert, authority.cert, **asked,
                                         now=NOW + timedelta(days=368))  # 29 days left
    assert not server_certificate_serves(cert, authority.cert, **asked,
                                         now=NOW + timedelta(days=400))  # expired
    assert not server_certificate_serves(
        cert, authority.cert, dns_names=[*DNS, "tablet-gate.hangar.lan"], ip_addresses=IPS,
        now=NOW)
    assert not server_certificate_serves(
        cert, authority.cert, dns_names=DNS,
        ip_addresses=[*IPS, ipaddress.ip_address("10.0.0.7")], now=NOW)
    other = create_authority("Another station", NOW)
    assert not server_certificate_serves(cert, other.cert, **asked, now=NOW)


@pytest.mark.parametrize(("text", "expected"), [
    ("Station.Hangar.LAN.", "station.hangar.lan"),
    ("vm", "vm"),
    ("192.168.40.12", ipaddress.ip_address("192.168.40.12")),
    ("[fd12:3456::12]", ipaddress.ip_address("fd12:3456::12")),
])
def test_names_are_read_as_dns_names_or_ip_addresses(text, expected):
    assert parse_server_name(text) == expected


@pytest.mark.parametrize(("text", "says"), [
    ("", "empty"),
    ("https://station.lan", "without https://"),
    ("station.lan:8443", "--port"),
    ("192.168.1.300", "not a valid one"),
    ("*.hangar.lan", "wildcard"),
    ("bad name", "not a valid DNS name"),
    ("under_score", "not a valid DNS name"),
    ("-dash.lan", "not a valid DNS name"),
    ("hångar.lan", "xn--"),
    ("a" * 64 + ".lan", "1 to 63"),
])
def test_a_bad_name_is_refused_with_what_to_do(text, says):
    with pytest.raises(ServerNameProblem) as refused:
        parse_server_name(text)
    assert says in str(refused.value)


def test_the_lan_names_always_hold_localhost_and_the_loopback_address():
    names = lan_names("0.0.0.0", ["station.hangar.lan"])
    assert names[:3] == ["localhost", "127.0.0.1", "::1"]
    assert names[-1] == "station.hangar.lan"
    assert all(parse_server_name(name) for name in names)  # nothing invalid slips in
    assert "192.168.40.12" in lan_names("192.168.40.12")  # the address listened on


# The kept certificate, beside the CA in the database's authority folder.

def _tls(db_path, names, now):
    return station_tls(db_path, "Test station", names, now)


def test_the_station_keeps_its_server_certificate_beside_the_ca(tmp_path):
    db_path = tmp_path / "station.db"
    tls = _tls(db_path, ["localhost", "127.0.0.1"], NOW)
    assert tls.issued and tls.cert_file.parent == authority_folder(db_path)
    assert stat.S_IMODE((authority_folder(db_path) / SERVER_KEY_FILE).stat().st_mode) == 0o600
    assert b"ENCRYPTED PRIVATE KEY" in tls.key_file.read_bytes()
    key = serialization.load_pem_private_key(tls.key_file.read_bytes(), tls.key_password)
    assert key.public_key() == tls.certificate.public_key()
    assert tls.authority_cert == station_authority(db_path, "Test station", NOW).cert
    tls.certificate.verify_directly_issued_by(tls.authority_cert)


def test_a_good_certificate_is_reused(tmp_path):
    db_path = tmp_path / "station.db"
    first = _tls(db_path, ["localhost", "127.0.0.1", "station.hangar.lan"], NOW)
    again = _tls(db_path, ["127.0.0.1", "localhost"], NOW + timedelta(days=300))
    assert not again.issued
    assert again.certificate.serial_number == first.certificate.serial_number
    assert again.cert_file.read_bytes() == first.cert_file.read_bytes()


@pytest.mark.parametrize(("later", "names"), [
    (timedelta(days=368), ["localhost", "127.0.0.1"]),  # 29 days left: renewed in time
    (timedelta(days=500), ["localhost", "127.0.0.1"]),  # expired
    (timedelta(days=1), ["localhost", "127.0.0.1", "tablet-gate.hangar.lan"]),  # a new name
    (timedelta(days=1), ["localhost", "127.0.0.1", "10.0.0.7"]),  # a new address
])
def test_an_expiring_or_name_short_certificate_is_issued_again(tmp_path, later, names):
    db_path = tmp_path / "station.db"
    first = _tls(db_path, ["localhost", "127.0.0.1"], NOW)
    renewed = _tls(db_path, names, NOW + later)
    assert renewed.issued
    assert renewed.certificate.serial_number != first.certificate.serial_number
    assert renewed.certificate.not_valid_after_utc == NOW + later + SERVER_VALIDITY
    assert server_certificate_serves(
        renewed.certificate, renewed.authority_cert,
        dns_names=[n for n in names if not n[0].isdigit()],
        ip_addresses=[ipaddress.ip_address(n) for n in names if n[0].isdigit()],
        now=NOW + later)
    kept = x509.load_pem_x509_certificate(renewed.cert_file.read_bytes())
    assert kept.serial_number == renewed.certificate.serial_number


def test_a_damaged_kept_certificate_is_replaced(tmp_path):
    db_path = tmp_path / "station.db"
    first = _tls(db_path, ["localhost"], NOW)
    first.cert_file.write_text("not a certificate")
    assert _tls(db_path, ["localhost"], NOW).issued


def test_a_bad_name_writes_nothing(tmp_path):
    db_path = tmp_path / "station.db"
    with pytest.raises(ServerNameProblem, match="not a valid DNS name"):
        _tls(db_path, ["localhost", "bad name"], NOW)
    assert not authority_folder(db_path).exists()
