"""Security headers: every route, as every role and as a stranger, carries them; the
content policy allows only the station's own files; HSTS only over HTTPS; no-store on what
the station renders for a person.

Requirement numbers: OWASP ASVS 4.0.3, V14.4 "HTTP Security Headers" and V8.2.1 (client-side
caching), as listed at https://cornucopia.dotnetlab.eu/taxonomy/ASVS-4.0.3/14-configuration/
04-http-security-headers and https://cornucopia-mvp.vercel.app/taxonomy/asvs-4.0.3/
08-data-protection/02-client-side-data-protection.
"""

from __future__ import annotations

import http.client
import json
import re
import ssl

import pytest

from tests.conftest import DEMO_PINS
from tests.https_station import serving_https
from tests.web.jobs import _event, functional_check_counted
from tests.web.test_roles import SAMPLE_ARGS, USERS
from webapp.records.identity import CERT_FILE
from webapp.station.authority import authority_folder

STATIC_SAMPLES = ("css/sparkward.css", "js/sparkward.js", "vendor/htmx-2.0.11.min.js",
                  "icon.svg")
# Public files the station lets a browser keep but check on every use (headers.py).
REVALIDATED = {"/sw.js", "/manifest.webmanifest", "/station-ca.pem", "/station-ca.crt",
               "/station-ca.crl"}


def parse_csp(header: str) -> dict[str, list[str]]:
    """A policy as {directive: [sources]}; a directive named twice fails (CSP 3, 2.2.1:
    the browser ignores the second one, from memory)."""
    policy: dict[str, list[str]] = {}
    for part in header.split(";"):
        words = part.split()
        if not words:
            continue
        name = words[0].lower()
        assert name not in policy, f"{name} given twice in {header!r}"
        policy[name] = words[1:]
    return policy


def parse_permissions(header: str) -> dict[str, str]:
    """A Permissions-Policy (a structured-field dictionary, RFC 8941) as {feature: allowlist}."""
    features = {}
    for item in header.split(","):
        name, _, allow = item.strip().partition("=")
        features[name] = allow
    return features


def _urls(app):
    """(url, endpoint) for every GET route, with a sample for each argument."""
    for rule in app.url_map.iter_rules():
        if "GET" not in rule.methods:
            continue
        if rule.endpoint == "static":
            for name in STATIC_SAMPLES:
                yield f"/static/{name}", rule.endpoint
            continue
        yield rule.build(SAMPLE_ARGS, append_unknown=False)[1], rule.endpoint


def assert_security_headers(answer, url: str, *, secure: bool = False) -> None:
    headers = answer.headers
    policy = parse_csp(headers.get("Content-Security-Policy", ""))
    if answer.mimetype == "application/pdf":
        # Chromium's PDF viewer runs under the PDF's own policy: only framing is refused.
        assert policy == {"frame-ancestors": ["'none'"]}, url
    else:
        # V14.4.3: a CSP that allows only the station's own scripts and styles.
        assert policy.get("default-src") == ["'self'"], url
        assert policy.get("script-src") == ["'self'"], url
        assert policy.get("style-src") == ["'self'"], url
        for name in ("img-src", "connect-src", "worker-src", "manifest-src", "form-action"):
            assert policy.get(name) == ["'self'"], (url, name)
        assert policy.get("base-uri") == ["'none'"] and policy.get("object-src") == ["'none'"]
    # V14.4.7: nobody frames the station, by CSP and by the older header.
    assert policy.get("frame-ancestors") == ["'none'"], url
    assert headers.get("X-Frame-Options") == "DENY", url
    sources = [source.lower() for values in policy.values() for source in values]
    for loose in ("'unsafe-inline'", "'unsafe-eval'", "'unsafe-hashes'", "*", "data:",
                  "http:", "https:", "blob:"):
        assert loose not in sources, (url, loose)
    assert headers.get("X-Content-Type-Options") == "nosniff", url  # V14.4.4
    assert headers.get("Referrer-Policy") == "same-origin", url  # V14.4.6
    features = parse_permissions(headers.get("Permissions-Policy", ""))
    assert features.get("camera") == "(self)" and features.get("microphone") == "(self)", url
    for off in ("geolocation", "payment", "usb"):
        assert features.get(off) == "()", (url, off)
    assert headers.get("Cross-Origin-Opener-Policy") == "same-origin", url
    # V14.4.5: HSTS; RFC 6797 7.2 (from memory): never over plain HTTP. A year: 31536000 s.
    hsts = headers.get("Strict-Transport-Security")
    if secure:
        assert hsts is not None, url
        max_age = re.fullmatch(r"max-age=(\d+)(;.*)?", hsts)
        assert max_age and int(max_age.group(1)) >= 31536000, hsts
    else:
        assert hsts is None, url
    # V14.4.1: a Content-Type on every answer with content, with a charset for text.
    if answer.data:
        content_type = headers.get("Content-Type", "")
        assert content_type, url
        if content_type.startswith("text/"):
            assert "charset=utf-8" in content_type.lower(), (url, content_type)
    # V14.4.2: an API answer opened straight in a browser is saved, not shown.
    if answer.mimetype == "application/json":
        assert headers.get("Content-Disposition", "").startswith("attachment;"), url


def expected_cache_control(url: str) -> str:
    if url == "/static/vendor/htmx-2.0.11.min.js":
        return "public, max-age=31536000, immutable"  # the version is in the name
    if url.startswith("/static/") or url in REVALIDATED:
        return "no-cache"
    return "no-store"


def assert_no_inline_code(html: str, url: str) -> None:
    """What the CSP would refuse in a page: inline <script>, <style>, style= or on*=."""
    assert not re.search(r"<script(?![^>]*\bsrc=)[^>]*>", html, re.I), url
    assert not re.search(r"<style[\s>]", html, re.I), url
    assert not re.search(r"\sstyle\s*=", html, re.I), url
    assert not re.search(r"\son[a-z]+\s*=", html, re.I), url
    assert "javascript:" not in html.lower(), url


@pytest.fixture
def job_one(login):
    answer = login("mech1").post_json("/api/jobs", {"procedure": "exciter-removal",
                                                    "engine": 1, "channel": "A"})
    assert answer.status_code == 201 and answer.get_json()["id"] == 1


@pytest.mark.parametrize("who", [*USERS.values(), None])
def test_every_get_route_carries_the_headers(app, client, login, job_one, who):
    visitor = login(who) if who else client
    checked = pages = 0
    for url, _endpoint in _urls(app):
        answer = visitor.get(url)
        assert answer.status_code < 500, (url, answer.status_code)
        assert_security_headers(answer, url)
        assert answer.headers.get("Cache-Control") == expected_cache_control(url), url
        if answer.mimetype == "text/html" and answer.status_code == 200:
            assert_no_inline_code(answer.get_data(as_text=True), url)
            pages += 1
        answer.close()  # a file answer holds its file open until closed
        checked += 1
    assert checked >= 35
    assert pages >= (3 if who is None else 6)  # /login, /offline, /station-ca at least


@pytest.mark.parametrize("who", ["mech1", "super"])
def test_fragments_and_errors_carry_them_too(app, login, job_one, who):
    person = login(who)
    fragment = person.get("/jobs/1", headers={"HX-Request": "true"})
    assert fragment.status_code == 200 and "<html" not in fragment.get_data(as_text=True)
    for answer, url in ((fragment, "fragment"), (person.get("/no/such/page"), "404"),
                        (person.get("/jobs/999999"), "missing job"),
                        (person.get("/api/jobs/999999"), "missing job, JSON"),
                        (person.client.put("/api/fleet"), "405")):
        assert_security_headers(answer, url)
        assert answer.headers["Cache-Control"] == "no-store", url
    assert_no_inline_code(fragment.get_data(as_text=True), "fragment")


def test_the_log_in_page_and_log_in_answers_are_never_stored(client):
    # V8.2.1: the log-in page carries a CSRF token tied to the session.
    page = client.get("/login")
    assert page.status_code == 200 and page.headers["Cache-Control"] == "no-store"
    refused = client.post("/login", data={"username": "mech1", "password": "wrong"})
    assert refused.status_code in (400, 401, 403, 422)
    assert_security_headers(refused, "refused log-in")
    assert refused.headers["Cache-Control"] == "no-store"


def test_the_signed_record_pdf_is_never_stored(login, db, clock):
    """V8.2.1: a safety record behind a log-in stays out of the tablet's HTTP cache. The
    review page of the job, waiting for certification, keeps the policy too."""
    mech1, mech2, supervisor = login("mech1"), login("mech2"), login("super")
    job = functional_check_counted(mech1, mech2, db, clock)
    job.ok(_event("sign-selector", "signed", pin=DEMO_PINS["mech1"]))
    job.ok(_event("sign-engine", "signed", pin=DEMO_PINS["mech2"]), client=mech2)
    review = supervisor.get(f"/review/{job.id}")
    html = review.get_data(as_text=True)
    assert 'data-testid="certify-form"' in html and 'data-testid="record-preview"' in html
    assert_security_headers(review, "review page")
    assert review.headers["Cache-Control"] == "no-store"
    assert_no_inline_code(html, "review page")
    for person in (mech1, supervisor):
        pdf = person.get(f"/jobs/{job.id}/record.pdf")
        assert pdf.status_code == 200 and pdf.mimetype == "application/pdf"
        assert pdf.data.startswith(b"%PDF-")
        assert pdf.headers["Cache-Control"] == "no-store"
        assert_security_headers(pdf, "record.pdf")
        api = person.get(f"/api/jobs/{job.id}")
        assert api.status_code == 200 and api.headers["Cache-Control"] == "no-store"
        assert api.headers["Content-Disposition"] == 'attachment; filename="api.json"'


def test_hsts_only_when_the_request_came_over_https(client, login):
    secure = client.get("/login", base_url="https://localhost")
    assert_security_headers(secure, "/login over https", secure=True)
    # RFC 6797 6.1.2 (from memory): includeSubDomains left out on purpose (headers.py).
    assert "includesubdomains" not in secure.headers["Strict-Transport-Security"].lower()
    assert "Strict-Transport-Security" not in client.get("/login").headers
    person = login("mech1")
    assert "Strict-Transport-Security" in person.get(
        "/fleet", base_url="https://localhost").headers
    assert "Strict-Transport-Security" not in person.get("/fleet").headers


def test_the_real_https_server_sends_hsts(db_path, tmp_path):
    """cheroot under `sparkward serve --https`: Flask sees the request as secure."""
    with serving_https(db_path, tmp_path, ["station.hangar.test"]) as (port, _log):
        trusting = ssl.create_default_context(
            cafile=str(authority_folder(db_path) / CERT_FILE))
        connection = http.client.HTTPSConnection("127.0.0.1", port, context=trusting,
                                                 timeout=5)
        try:
            for url in ("/login", "/static/css/sparkward.css", "/sw.js"):
                connection.request("GET", url)
                answer = connection.getresponse()
                answer.read()
                assert answer.status == 200, url
                hsts = answer.getheader("Strict-Transport-Security", "")
                assert re.fullmatch(r"max-age=\d+", hsts), (url, hsts)
                assert int(hsts.split("=")[1]) >= 31536000
                assert "frame-ancestors 'none'" in answer.getheader(
                    "Content-Security-Policy", ""), url
        finally:
            connection.close()


def test_htmx_is_configured_for_the_policy(client):
    """htmx 2 injects an inline <style> and may eval unless told not to (its config);
    the page tells it through the htmx-config meta tag."""
    html = client.get("/login").get_data(as_text=True)
    meta = re.search(r"<meta name=\"htmx-config\" content='([^']+)'>", html)
    assert meta, "base.html carries htmx's configuration"
    config = json.loads(meta.group(1))
    assert config == {"includeIndicatorStyles": False, "allowEval": False,
                      "allowScriptTags": False}
    with client.get("/static/css/sparkward.css") as answer:
        css = answer.get_data(as_text=True)
    assert ".htmx-indicator" in css and ".htmx-request .htmx-indicator" in css
