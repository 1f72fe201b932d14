"""The installable app: the web app manifest and the service worker, served from the root."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path
from typing import Any

from flask import Blueprint, Response, current_app, render_template, request, send_from_directory

from . import assets
from .common import public

# What static/js/sw.js says until the station fills it in (fill_in_worker).
VERSION_PLACEHOLDER = 'const VERSION = "unfilled";'
SHELL_PLACEHOLDER = "const SHELL_FILES = [];"
# Where the worker's copy of static/js/job_copies.js goes (the page loads the same file):
# written into the worker, not imported, so the tablet fetches that file once.
JOB_COPIES_PLACEHOLDER = "/* the station writes static/js/job_copies.js here */"

bp = Blueprint("pwa", __name__)


def _static(*parts: str) -> Path:
    return Path(current_app.static_folder or "static").joinpath(*parts)


@bp.get("/sw.js")
@public
def service_worker() -> Any:
    """static/js/sw.js from the site root, so its scope can be the whole station, with the
    shell's current URLs and a version made from them filled in: a changed file under
    static/ makes a new worker, which replaces the tablets' app shell.

    no-cache: the browser checks for a new worker on every visit."""
    source = _static("js", "sw.js").read_text(encoding="utf-8")
    if source.count(JOB_COPIES_PLACEHOLDER) != 1:
        raise RuntimeError(f"static/js/sw.js must hold exactly one {JOB_COPIES_PLACEHOLDER!r}")
    source = source.replace(JOB_COPIES_PLACEHOLDER,
                            _static("js", "job_copies.js").read_text(encoding="utf-8"))
    shell = assets.shell_urls()
    version = hashlib.sha256("\n".join([source, *shell]).encode()).hexdigest()[:16]
    script = fill_in_worker(source, version, shell)
    response = Response(script, mimetype="text/javascript")
    response.headers["Service-Worker-Allowed"] = "/"
    response.set_etag(version)
    return response.make_conditional(request)


def fill_in_worker(source: str, version: str, shell: list[str]) -> str:
    """sw.js with its two placeholders replaced; a missing one is a fault of the file."""
    for placeholder, filled in (
            (VERSION_PLACEHOLDER, f"const VERSION = {json.dumps(version)};"),
            (SHELL_PLACEHOLDER, f"const SHELL_FILES = {json.dumps(shell, indent=2)};")):
        if source.count(placeholder) != 1:
            raise RuntimeError(f"static/js/sw.js must hold exactly one {placeholder!r}")
        source = source.replace(placeholder, filled)
    return source


@bp.get("/manifest.webmanifest")
@public
def manifest() -> Any:
    return send_from_directory(_static(), "manifest.webmanifest",
                               mimetype="application/manifest+json", max_age=0)


@bp.get("/offline")
@public
def offline_page() -> Any:
    """What the worker shows for a page this tablet never opened, while the station cannot
    be reached (pre-cached at install). No person on it: the tablet may change hands."""
    return render_template("offline.html", person=None)
