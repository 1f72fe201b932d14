"""The installable app: the web app manifest and the service worker, served from the root."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from flask import Blueprint, current_app, render_template, send_from_directory

from .common import public

bp = Blueprint("pwa", __name__)


def _static(*parts: str) -> Path:
    return Path(current_app.static_folder or "static").joinpath(*parts)


@bp.get("/sw.js")
@public
def service_worker() -> Any:
    """static/js/sw.js from the site root, so its scope can be the whole station.

    no-cache: the browser checks for a new worker on every visit (a changed cache
    version in the file is what replaces the tablets' app shell)."""
    response = send_from_directory(_static("js"), "sw.js", mimetype="text/javascript",
                                   max_age=0)
    response.headers["Service-Worker-Allowed"] = "/"
    response.headers["Cache-Control"] = "no-cache"
    return response


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
