"""Compressed answers: HTML, CSS, JS, JSON, the manifest and SVG go out brotli or gzip
encoded when the browser accepts it (Flask-Compress), with `Vary: Accept-Encoding`.

PDFs and anything already compressed are not in COMPRESSED_TYPES and go out as they are.
Flask-Compress marks a strong ETag with the encoding ("abc:gzip") and answers a conditional
request for it with a 304 itself, after compressing.
"""

from __future__ import annotations

from flask import Flask
from flask_compress import Compress

COMPRESSED_TYPES = [
    "text/html", "text/css", "text/javascript", "application/javascript",
    "application/json", "application/manifest+json", "image/svg+xml",
]
# brotli first (Chromium and Safari send it over HTTPS), gzip for everyone else. Neither
# zstd (no Safari, so no iPad, when this was written: from memory) nor deflate (long
# ambiguous between zlib and raw streams: RFC 9110 8.4.1.2, from memory).
ALGORITHMS = ["br", "gzip"]
SETTINGS = {
    "COMPRESS_MIMETYPES": COMPRESSED_TYPES,
    "COMPRESS_ALGORITHM": ALGORITHMS,
    # Files under static/ are sent as streams; compress those too, gzip included.
    "COMPRESS_ALGORITHM_STREAMING": ALGORITHMS,
    # A stream's ETag is checked again after compression for these endpoints.
    "COMPRESS_STREAMING_ENDPOINT_CONDITIONAL": ["static", "pwa.manifest"],
    # Below this an encoded body saves less than its headers cost (common practice, no
    # source; Flask-Compress's default).
    "COMPRESS_MIN_SIZE": 500,
}


def register(app: Flask) -> None:
    """Compress answers unless `COMPRESS_REGISTER` is false (the bench's baseline)."""
    for key, value in SETTINGS.items():
        app.config.setdefault(key, value)
    Compress(app)
