"""The station's front door for input: body sizes, JSON that is really JSON, ids that fit,
query and form text a person could have typed; refusals logged with a bounded excerpt.

Each check answers a clear 4xx naming what was wrong before any room's view runs, so no
request reaches SQLite or a template with a value they cannot hold.
"""

from __future__ import annotations

import json
import logging
import re
from typing import Any

from flask import Flask, abort, current_app, request
from flask.json.provider import DefaultJSONProvider
from werkzeug.routing import IntegerConverter

log = logging.getLogger("sparkward.input")

SQLITE_MAX_INT = 2**63 - 1  # SQLite INTEGER is a signed 64-bit value (sqlite.org/datatype3.html)
EXCERPT_CHARS = 200
# C0 controls and DEL; tab, newline and carriage return are still refused in a query (a
# `next` or a filter never holds them) but allowed in form text (a finding's lines).
_QUERY_CONTROL = re.compile(r"[\x00-\x1f\x7f]")
_FORM_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


class InputRefused(ValueError):
    """A request's part that cannot be used: where (field) and why."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(message)
        self.field = field
        self.message = message


class RowIdConverter(IntegerConverter):
    """`<int:...>` route values that fit an SQLite row id; a longer number is no such row
    (404), never an OverflowError inside the store."""

    def __init__(self, map: Any, *args: Any, **kwargs: Any) -> None:  # noqa: A002
        kwargs.setdefault("max", SQLITE_MAX_INT)
        super().__init__(map, *args, **kwargs)


def _no_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a JSON number (RFC 8259 section 6)")


def text_problem(value: str, *, query: bool = False) -> str | None:
    """Why a piece of request text cannot be kept, or None: lone surrogates (not UTF-8,
    which SQLite and our JSON answers need), control characters."""
    try:
        value.encode("utf-8")
    except UnicodeEncodeError:
        return "contains characters that are not valid Unicode text"
    if (_QUERY_CONTROL if query else _FORM_CONTROL).search(value):
        return "contains control characters (a line break or similar)"
    return None


def _walk_text(value: Any, path: str) -> None:
    if isinstance(value, str):
        said = text_problem(value)
        if said is not None:
            raise InputRefused(path or "(body)", f"The text {said}.")
    elif isinstance(value, dict):
        for key, item in value.items():
            _walk_text(key, path)
            _walk_text(item, f"{path}.{key}" if path else str(key))
    elif isinstance(value, list):
        for index, item in enumerate(value):
            _walk_text(item, f"{path}.{index}" if path else str(index))


class StrictJSONProvider(DefaultJSONProvider):
    """JSON as RFC 8259 defines it: NaN and Infinity are not numbers and a string holds only
    Unicode scalar values; Python's json module accepts both by default."""

    def loads(self, s: str | bytes, **kwargs: Any) -> Any:
        kwargs.setdefault("parse_constant", _no_constant)
        found = json.loads(s, **kwargs)
        _walk_text(found, "")
        return found


def body_limit() -> int:
    """This request's body limit: the record check's upload has its own."""
    if request.endpoint == "supervisor.verify_page":
        return int(current_app.config["MAX_UPLOAD_BYTES"])
    return int(current_app.config["MAX_BODY_BYTES"])


_SECRET_NAMES = ("pin", "password", "csrf_token")
_SECRET_IN_JSON = re.compile(r'("(?:pin|password|csrf_token)"\s*:\s*)"(?:[^"\\]|\\.)*"')


def excerpt() -> str:
    """The first characters of the request body, for a log line: never the whole body, never
    a PIN or a password (OWASP ASVS 4.0.3 V7.1.1: no credentials in logs)."""
    if (request.content_length or 0) > body_limit():
        return f"({request.content_length} bytes, not read)"
    if request.mimetype in ("application/x-www-form-urlencoded", "multipart/form-data"):
        text = "&".join(f"{k}={'***' if k in _SECRET_NAMES else v}"
                        for k, v in request.form.items(multi=True))
        return text[:EXCERPT_CHARS]
    try:
        raw = request.get_data(cache=True)[:EXCERPT_CHARS * 4]
    except Exception:  # noqa: BLE001 - a body too large to read is logged as such
        return "(not read)"
    return _SECRET_IN_JSON.sub(r'\1"***"', raw.decode("utf-8", "replace"))[:EXCERPT_CHARS]


def log_refusal(status: int, rule: str, field: str | None = None) -> None:
    log.warning("refused %s %s %s: %s%s; body starts %r", status, request.method, request.path,
                rule, f" ({field})" if field else "", excerpt())


# Query parameters a route judges by its own rule: the log-in's `next` sends anything that is
# not a plain path on this station (control characters included) to the home page, so the
# person is still logged in rather than refused.
JUDGED_BY_ROUTE = {("auth.login", "next")}


def register(app: Flask) -> None:
    """Install the guard: first of the station's before-request steps."""
    app.json = StrictJSONProvider(app)
    app.url_map.converters["int"] = RowIdConverter

    @app.before_request
    def guard_input() -> None:
        limit = body_limit()
        request.max_content_length = limit  # also bounds a body sent without a length
        if (request.content_length or 0) > limit:
            abort(413, f"The request body is larger than the station takes here "
                       f"({limit // 1024} KB); nothing was stored.")
        for name, values in request.args.lists():
            if (request.endpoint, name) in JUDGED_BY_ROUTE:
                continue
            for value in (name, *values):
                said = text_problem(value, query=True)
                if said is not None:
                    raise InputRefused(f"query.{name[:40]}",
                                       f"The query parameter '{name[:40]}' {said}.")
        if request.method in ("POST", "PUT", "PATCH") and request.mimetype in (
                "application/x-www-form-urlencoded", "multipart/form-data"):
            for name, values in request.form.lists():
                for value in (name, *values):
                    said = text_problem(value)
                    if said is not None:
                        raise InputRefused(f"form.{name[:40]}", f"The field '{name[:40]}' {said}.")
