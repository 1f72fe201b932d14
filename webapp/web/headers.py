"""Security headers on every answer: content policy, framing, sniffing, referrer, powerful
features, HSTS over HTTPS, and what a browser may keep in its HTTP cache.

Every answer carries CONTENT_SECURITY_POLICY except a record PDF, which carries only
PDF_POLICY (no framing): the browser's PDF viewer lives under the PDF's policy (see there).

What may be cached, and why (OWASP ASVS 4.0.3 V8.2.1):

- Everything the station renders or computes (pages, htmx fragments, JSON, record PDFs,
  redirects, errors, the log-in page): ``no-store``. They name people, jobs and safety
  records; a shared tablet must not keep them in its HTTP cache. This includes the pages
  the service worker keeps for offline work: the worker stores them through the Cache API,
  which ignores ``Cache-Control`` (only ``Vary: *`` or a 206 stop ``cache.put``: the
  Service Workers spec, from memory), so ``no-store`` does not take a job off a tablet in
  the hangar (tests/e2e/test_offline.py works a job offline under these headers, and
  tests/e2e/test_csp_browser.py reloads a no-store page from the worker's copy); the
  worker clears its pages at log-out.
- The public files of the installable app and of the station's authority (``/sw.js``, the
  manifest, the CA certificate and its revocation list): ``no-cache``, i.e. kept but
  checked with the station on every use, so a new worker or list is seen at once.
- ``/static/`` and the manifest: the pages name each file with its content hash
  (``?v=<hash>``, assets.py), and a file whose name carries its version
  (``vendor/htmx-2.0.11.min.js``) never changes under that name either: one year,
  ``immutable``, so a reload asks nothing about them (the worker answers them from its shell
  cache in any case). A URL without the hash, or with an older one, gets the current file
  ``no-cache`` (revalidated by ETag): those bytes are not what that URL will always name.
"""

from __future__ import annotations

import re

from flask import Flask, Response, request

from .assets import current_version_requested

# Only the station's own scripts, styles, images, connections, worker and manifest; no
# inline script or style, no eval, no plug-ins, no framing, no <base> (ASVS 4.0.3 V14.4.3,
# V14.4.7). htmx is told in base.html not to inject its indicator <style> nor to eval.
CONTENT_SECURITY_POLICY = "; ".join((
    "default-src 'self'",
    "script-src 'self'",
    "style-src 'self'",
    "img-src 'self'",
    "connect-src 'self'",
    "worker-src 'self'",
    "manifest-src 'self'",
    "frame-ancestors 'none'",
    "form-action 'self'",
    "base-uri 'none'",
    "object-src 'none'",
))

# A record PDF is no page of ours: Chromium shows it in its own viewer, an <embed> in a
# page it makes up, and the PDF's policy governs that page: object-src 'none' or a
# default-src blocks the viewer (Chromium issue 271452; a known cause of "PDFs don't open
# in Chrome" reports). Not checkable here (headless Chromium has no PDF viewer), so the PDF
# keeps only what cannot hurt the viewer: no one frames it.
PDF_POLICY = "frame-ancestors 'none'"

# The microphone (spark counts by ear) and the camera (photos of findings) for the station's
# own pages only; every other powerful feature off. Only names Chromium knows: an unknown
# one costs a console warning on every page (tests/e2e/test_csp_browser.py looks; Chromium
# 156 did not know "bluetooth").
PERMISSIONS_POLICY = ", ".join((
    "camera=(self)", "microphone=(self)",
    "geolocation=()", "payment=()", "usb=()", "serial=()", "hid=()",
    "midi=()", "accelerometer=()", "gyroscope=()", "magnetometer=()",
    "display-capture=()", "idle-detection=()", "screen-wake-lock=()",
))

# One year (ASVS 4.0.3 V14.4.5 asks for HSTS; RFC 6797 6.1.1 max-age in seconds, from
# memory). No includeSubDomains: the station is one host on a LAN name it may share with
# printers and other devices that speak only HTTP; HSTS is not ours to impose on them. Sent
# only over HTTPS (RFC 6797 7.2, from memory: a host must not send it over plain HTTP).
STRICT_TRANSPORT_SECURITY = "max-age=31536000"

SECURITY_HEADERS = {
    "X-Frame-Options": "DENY",  # frame-ancestors' older twin, ASVS 4.0.3 V14.4.7
    "X-Content-Type-Options": "nosniff",  # ASVS 4.0.3 V14.4.4
    "Referrer-Policy": "same-origin",  # ASVS 4.0.3 V14.4.6: job URLs stay on the station
    "Permissions-Policy": PERMISSIONS_POLICY,
    "Cross-Origin-Opener-Policy": "same-origin",
    "Cross-Origin-Resource-Policy": "same-origin",
}

NO_STORE = "no-store"
REVALIDATE = "no-cache"
IMMUTABLE = "public, max-age=31536000, immutable"

# Public files checked with the station on every use (see the module's docstring).
PUBLIC_FILES = frozenset({
    "pwa.service_worker", "pwa.manifest", "station.authority_certificate",
    "station.authority_certificate_der", "station.revocation_list",
})
VERSIONED_NAME = re.compile(r"^/static/vendor/[^/]+-\d+\.\d+\.\d+(\.min)?\.js$")

# ASVS 4.0.3 V14.4.2: an API answer opened directly is saved, never rendered.
API_DISPOSITION = 'attachment; filename="api.json"'


def cache_control_for(path: str, endpoint: str | None, current_hash: bool = False) -> str:
    """The Cache-Control the station sends for a request to `path` served by `endpoint`;
    `current_hash`: the request names the file by its current content hash."""
    if endpoint == "static" or path.startswith("/static/"):
        return IMMUTABLE if current_hash or VERSIONED_NAME.match(path) else REVALIDATE
    if endpoint in PUBLIC_FILES:
        if current_hash:
            return IMMUTABLE
        return REVALIDATE
    return NO_STORE


def add_security_headers(response: Response) -> Response:
    for name, value in SECURITY_HEADERS.items():
        response.headers[name] = value
    response.headers["Content-Security-Policy"] = (
        PDF_POLICY if response.mimetype == "application/pdf" else CONTENT_SECURITY_POLICY)
    if request.is_secure:
        response.headers["Strict-Transport-Security"] = STRICT_TRANSPORT_SECURITY
    response.headers["Cache-Control"] = cache_control_for(
        request.path, request.endpoint, current_version_requested())
    if response.mimetype == "application/json" and "Content-Disposition" not in response.headers:
        response.headers["Content-Disposition"] = API_DISPOSITION
    return response


def register(app: Flask) -> None:
    app.after_request(add_security_headers)
