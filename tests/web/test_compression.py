"""Compressed answers: a page, CSS, JS and JSON come gzip or brotli encoded when the client
accepts it, and decode (by Python's gzip module and Google's brotli, not by our code) to
exactly the answer sent without compression; PDFs never; security headers, Vary and
conditional requests unchanged."""

from __future__ import annotations

import gzip
import re

import brotli
import pytest

from tests.conftest import DEMO_PINS
from tests.web.jobs import _event, functional_check_counted
from tests.web.test_headers import assert_security_headers

# flask-wtf signs the CSRF token with a time stamp, so two renders of one page may differ
# only there.
CSRF_TOKEN = re.compile(rb'(name="csrf-token" content="|"X-CSRFToken": ")[^"]+')


def _plain_and_encoded(visitor, url: str, encoding: str):
    plain = visitor.get(url)
    plain_body = plain.get_data()
    encoded = visitor.get(url, headers={"Accept-Encoding": encoding})
    encoded_body = encoded.get_data()
    plain.close()
    encoded.close()
    return plain, plain_body, encoded, encoded_body


def _decode(body: bytes, encoding: str) -> bytes:
    return gzip.decompress(body) if encoding == "gzip" else brotli.decompress(body)


def _without_tokens(body: bytes) -> bytes:
    return CSRF_TOKEN.sub(rb"\1TOKEN", body)


@pytest.mark.parametrize("encoding", ["gzip", "br"])
@pytest.mark.parametrize("url", ["/fleet", "/static/css/sparkward.css",
                                 "/static/vendor/htmx-2.0.11.min.js",
                                 "/static/js/outbox.js", "/api/fleet", "/sw.js"])
def test_text_answers_decode_to_exactly_the_plain_answer(login, url, encoding):
    person = login("mech1")
    plain, plain_body, encoded, encoded_body = _plain_and_encoded(person, url, encoding)
    assert plain.status_code == encoded.status_code == 200, url
    assert "Content-Encoding" not in plain.headers, url
    assert encoded.headers["Content-Encoding"] == encoding, url
    decoded = _decode(encoded_body, encoding)
    if plain.mimetype == "text/html":
        assert _without_tokens(decoded) == _without_tokens(plain_body), url
    else:
        assert decoded == plain_body, url
    assert len(encoded_body) < len(plain_body), url
    for answer in (plain, encoded):
        assert "accept-encoding" in answer.headers.get("Vary", "").lower(), url
        assert_security_headers(answer, url)
        assert answer.headers["Cache-Control"] == plain.headers["Cache-Control"], url


def test_the_log_in_page_compresses_for_a_stranger(client):
    plain, plain_body, encoded, encoded_body = _plain_and_encoded(client, "/login", "gzip")
    assert encoded.headers["Content-Encoding"] == "gzip"
    assert _without_tokens(gzip.decompress(encoded_body)) == _without_tokens(plain_body)
    assert_security_headers(encoded, "/login")
    assert encoded.headers["Cache-Control"] == "no-store"
    # The fragment-or-page Vary stays beside the encoding's.
    fragment = client.get("/login", headers={"Accept-Encoding": "gzip"})
    assert "cookie" in fragment.headers["Vary"].lower()


def test_a_pdf_is_never_compressed(login, db, clock):
    mech1, mech2 = login("mech1"), login("mech2")
    job = functional_check_counted(mech1, mech2, db, clock)
    job.ok(_event("sign-selector", "signed", pin=DEMO_PINS["mech1"]))  # prints the record
    answer = mech1.get(f"/jobs/{job.id}/record.pdf", headers={"Accept-Encoding": "gzip, br"})
    assert answer.status_code == 200 and answer.mimetype == "application/pdf"
    assert "Content-Encoding" not in answer.headers
    assert answer.get_data().startswith(b"%PDF-")
    assert_security_headers(answer, "record.pdf")
    assert answer.headers["Cache-Control"] == "no-store"


@pytest.mark.parametrize("url", ["/static/icon.svg", "/manifest.webmanifest"])
def test_small_answers_go_as_they_are(client, url):
    with client.get(url, headers={"Accept-Encoding": "gzip"}) as small:
        assert small.status_code == 200 and len(small.get_data()) < 500
        assert "Content-Encoding" not in small.headers
        assert "accept-encoding" in small.headers["Vary"].lower()


def test_identity_or_an_unknown_encoding_gets_the_plain_answer(client):
    for accepted in ("identity", "compress", "gzip;q=0, identity"):
        with client.get("/static/css/sparkward.css",
                        headers={"Accept-Encoding": accepted}) as answer:
            assert "Content-Encoding" not in answer.headers, accepted
            assert answer.get_data().startswith(b"/*") or b"{" in answer.get_data()


@pytest.mark.parametrize("encoding", ["gzip", "br"])
def test_a_compressed_file_still_answers_its_etag_with_304(client, encoding):
    html = client.get("/login").get_data(as_text=True)
    url = re.search(r'src="(/static/js/outbox\.js\?v=[0-9a-f]+)"', html).group(1)
    headers = {"Accept-Encoding": encoding}
    with client.get(url, headers=headers) as first:
        etag = first.headers["ETag"]
        assert first.status_code == 200 and first.headers["Content-Encoding"] == encoding
    # The encoded body has its own validator: a cache never mixes the two (RFC 9110 8.8.3).
    assert etag.endswith(f':{encoding}"')
    with client.get(url, headers={**headers, "If-None-Match": etag}) as again:
        assert again.status_code == 304 and again.get_data() == b""
        assert again.headers["Cache-Control"] == "public, max-age=31536000, immutable"
        assert_security_headers(again, url)
    with client.get("/sw.js", headers=headers) as worker:
        assert worker.headers["Content-Encoding"] == encoding
        worker_etag = worker.headers["ETag"]
    with client.get("/sw.js", headers={**headers, "If-None-Match": worker_etag}) as again:
        assert again.status_code == 304
        assert again.headers["Cache-Control"] == "no-cache"
