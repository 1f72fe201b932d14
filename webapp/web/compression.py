"""Compressed answers: HTML, CSS, JS, JSON, the manifest and SVG go out brotli or gzip
encoded when the browser accepts it (Flask-Compress), with `Vary: Accept-Encoding`.

PDFs and anything already compressed are not in COMPRESSED_TYPES and go out as they are.
Flask-Compress marks a strong ETag with the encoding ("abc:gzip") and answers a conditional
request for it with a 304 itself, after compressing.
"""

from __future__ import annotations

from flask import Flask, Response
from flask_compress import Compress

COMPRESSED_TYPES = [
    "text/html", "text/css", "text/javascript", "application/javascript",
    "application/json", "application/manifest+json", "image/svg+xml",
]
# brotli first (Chromium and Safari send it over HTTPS), gzip for everyone else. Neither
# zstd (no Safari, so no iPad, when this was written: from memory) nor deflate (long
# ambiguous between zlib and raw streams: RFC 9110 8.4.1.2, from memory).
ALGORITHMS = ["br", "gzip"]
# Files up to this size are read into memory before compressing (see _read_whole_file).
WHOLE_FILE_LIMIT = 1024 * 1024
SETTINGS = {
    "COMPRESS_MIMETYPES": COMPRESSED_TYPES,
    "COMPRESS_ALGORITHM": ALGORITHMS,
    "COMPRESS_ALGORITHM_STREAMING": ALGORITHMS,
    # Brotli 5, not Flask-Compress's 4: at 4 our htmx, CSS and JS come out larger than gzip's
    # 6; 5 is about 6 % smaller than gzip for 2 ms on htmx's 52 KB (measured here; 9 and up
    # cost ten times the time for under 1 % more).
    "COMPRESS_BR_LEVEL": 5,
    # Below this an encoded body saves less than its headers cost (common practice, no
    # source; Flask-Compress's default).
    "COMPRESS_MIN_SIZE": 500,
}


def _read_whole_file(response: Response) -> Response:
    """A file answer (static/, the manifest) is a stream; Flask-Compress would compress it as
    one without closing the file it read (a ResourceWarning per answer) and without a
    Content-Length. Our files are small: read them whole first, closing the file when the
    answer closes, so they are compressed as one body with its length and ETag check."""
    if (response.direct_passthrough and response.mimetype in COMPRESSED_TYPES
            and response.content_length is not None
            and response.content_length <= WHOLE_FILE_LIMIT):
        response.direct_passthrough = False
        close = getattr(response.response, "close", None)
        response.make_sequence()
        if close is not None:
            # Closed now, not when the answer closes: Flask-Compress may answer a conditional
            # request with a 304 of its own, and the answer holding the file is then dropped
            # unclosed (a ResourceWarning seen in the browser tests).
            close()
    return response


def register(app: Flask) -> None:
    """Compress answers unless `COMPRESS_REGISTER` is false (the bench's baseline)."""
    for key, value in SETTINGS.items():
        app.config.setdefault(key, value)
    Compress(app)
    app.after_request(_read_whole_file)  # registered after: runs before Compress's hook
