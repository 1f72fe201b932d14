"""HTTPS on the hangar LAN: the CA page for tablets, and the real station serving TLS."""

from __future__ import annotations

import hashlib
import http.client
import socket
import ssl
from pathlib import Path

import pytest
from click.testing import CliRunner
from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization

from tests.https_station import serving_https
from webapp.cli import cli
from webapp.records.identity import CERT_FILE
from webapp.records.server_identity import SERVER_CERT_FILE
from webapp.station.authority import authority_folder


def _ca_file(db_path: Path) -> Path:
    return authority_folder(db_path) / CERT_FILE


def _fingerprint(pem: bytes) -> str:
    return x509.load_pem_x509_certificate(pem).fingerprint(hashes.SHA256()).hex(":").upper()


# The public page and the certificate file.

def test_the_pem_is_exactly_the_station_ca_certificate_and_never_its_key(client, db_path):
    answer = client.get("/station-ca.pem")
    assert answer.status_code == 200
    assert answer.mimetype == "application/x-pem-file"
    assert answer.headers["Content-Disposition"].startswith("attachment;")
    assert answer.data == _ca_file(db_path).read_bytes()
    assert answer.data.count(b"-----BEGIN") == 1 and b"PRIVATE KEY" not in answer.data
    cert = x509.load_pem_x509_certificate(answer.data)
    assert cert.extensions.get_extension_for_class(x509.BasicConstraints).value.ca
    # The same certificate in DER, for installers that want a .crt.
    der = client.get("/station-ca.crt")
    assert der.status_code == 200 and der.mimetype == "application/x-x509-ca-cert"
    assert der.headers["Content-Disposition"].endswith('.crt"')
    assert x509.load_der_x509_certificate(der.data) == cert


def test_the_page_explains_and_shows_the_fingerprint_without_a_log_in(client, db_path):
    answer = client.get("/station-ca")
    assert answer.status_code == 200
    page = answer.get_data(as_text=True)
    fingerprint = _fingerprint(_ca_file(db_path).read_bytes())
    assert f'data-testid="station-ca-fingerprint">{fingerprint}</code>' in page
    assert 'href="/station-ca.pem"' in page
    assert "offline" in page.lower() and "trust" in page
    assert "PRIVATE KEY" not in page
    assert 'data-testid="safety-notice"' in page
    # Over plain HTTP the page says how to turn HTTPS on; over HTTPS it does not.
    assert 'data-testid="station-ca-plain-http"' in page
    secure = client.get("/station-ca", base_url="https://localhost").get_data(as_text=True)
    assert 'data-testid="station-ca-plain-http"' not in secure


def test_the_login_page_links_to_the_station_certificate(client):
    page = client.get("/login").get_data(as_text=True)
    assert 'data-testid="station-ca-link"' in page and 'href="/station-ca"' in page


# Bad command lines are refused before anything is touched.

def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.mark.parametrize(("args", "says"), [
    (["--https", "--name", "bad name!"], "not a valid DNS name"),
    (["--https", "--name", "https://station.lan"], "without https://"),
    (["--https", "--name", "10.0.0.300"], "not a valid one"),
    (["--name", "station.lan"], "add --https"),
])
@pytest.mark.parametrize("command", ["demo", "serve"])
def test_a_bad_name_is_refused_and_the_database_kept(db_path, command, args, says):
    before = _digest(db_path)
    result = CliRunner().invoke(cli, [command, "--db", str(db_path), *args])
    assert result.exit_code == 2, result.output
    assert says in result.output
    assert db_path.is_file() and _digest(db_path) == before  # demo did not rebuild it
    assert not (authority_folder(db_path) / SERVER_CERT_FILE).exists()


# The real server process, over real TLS.

@pytest.fixture
def https_station(db_path, tmp_path):
    """`sparkward serve --https` on a free port over a copy of the demo database."""
    with serving_https(db_path, tmp_path, ["station.hangar.test"]) as running:
        yield running


def _tls_socket(context: ssl.SSLContext, port: int, server_hostname: str) -> ssl.SSLSocket:
    raw = socket.create_connection(("127.0.0.1", port), timeout=5)
    try:
        return context.wrap_socket(raw, server_hostname=server_hostname)
    except BaseException:
        raw.close()
        raise


def test_the_station_serves_https_that_only_its_ca_vouches_for(https_station, db_path):
    port, log = https_station
    trusting = ssl.create_default_context(cafile=str(_ca_file(db_path)))
    assert trusting.check_hostname and trusting.verify_mode == ssl.CERT_REQUIRED

    connection = http.client.HTTPSConnection("127.0.0.1", port, context=trusting, timeout=5)
    try:
        connection.request("GET", "/login")
        answer = connection.getresponse()
        body = answer.read().decode()
        assert answer.status == 200
        assert 'data-testid="login"' in body
        # The log-in cookie is marked Secure (it never goes out over plain HTTP) and carries
        # the __Host- prefix, which browsers keep only for this host and the whole path.
        cookie = answer.getheader("Set-Cookie", "")
        assert cookie.startswith("__Host-session="), cookie
        assert "Secure" in cookie and "Path=/;" in cookie + ";" and "Domain" not in cookie
        assert connection.sock.version() in ("TLSv1.2", "TLSv1.3")
        served = connection.sock.getpeercert(binary_form=True)
    finally:
        connection.close()
    kept = x509.load_pem_x509_certificate(
        (authority_folder(db_path) / SERVER_CERT_FILE).read_bytes())
    assert served == kept.public_bytes(serialization.Encoding.DER)

    # The name given with --name and localhost verify too; another name does not.
    for name in ("station.hangar.test", "localhost"):
        with _tls_socket(trusting, port, name) as tls:
            assert tls.getpeercert()["subjectAltName"]
    with pytest.raises(ssl.SSLCertVerificationError, match="match|mismatch"):
        _tls_socket(trusting, port, "elsewhere.test").close()
    # A tablet that does not trust the station's CA refuses the connection.
    with pytest.raises(ssl.SSLCertVerificationError):
        _tls_socket(ssl.create_default_context(), port, "127.0.0.1").close()

    printed = log.read_text()
    assert f"https://127.0.0.1:{port}/" in printed
    assert f"https://127.0.0.1:{port}/station-ca" in printed
    assert _fingerprint(_ca_file(db_path).read_bytes()) in printed
