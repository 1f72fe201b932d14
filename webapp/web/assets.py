"""The app shell's files by content: URLs that change when a file under static/ changes, and
the list of files the service worker keeps.

`url_for("static", filename=...)` (and `url_for("pwa.manifest")`) get `?v=<hash>`, the first
HASH_DIGITS hex digits of the file's SHA-256, added by one URL default registered here; no
template names a hash. A request that carries the file's current hash may be kept by the
browser for a year without asking again (headers.py); one carrying an older hash still gets
the current file, but only `no-cache` (see `current_version_requested`).
"""

from __future__ import annotations

import hashlib
import threading
from pathlib import Path
from typing import Any

from flask import Flask, current_app, request, url_for

VERSION_ARG = "v"
# 48 bits of SHA-256: a changed file gets a new URL; no two versions of one file collide in
# practice (common practice, no source).
HASH_DIGITS = 12
# Every CSS and JS file in these folders of static/ is part of the shell, so a file added
# there later is kept offline without anyone listing it.
SHELL_FOLDERS = ("css", "js", "vendor")
SHELL_SUFFIXES = (".css", ".js")
SHELL_OTHERS = ("icon.svg",)
NOT_IN_SHELL = frozenset({"js/sw.js"})  # the worker is fetched by the browser itself
# Endpoints whose answer is one file of static/, and which file.
MANIFEST_FILE = "manifest.webmanifest"
HASHED_ENDPOINTS = ("static", "pwa.manifest")


class ContentHashes:
    """SHA-256 prefixes of the files in one folder, read again only when a file's size or
    modification time changes (so an edited file gets its new URL without a restart)."""

    def __init__(self, root: Path) -> None:
        self.root = root.resolve()
        self._known: dict[str, tuple[int, int, str]] = {}
        self._lock = threading.Lock()

    def digest(self, filename: str) -> str | None:
        """The hash of static/`filename`, or None when there is no such file in the folder."""
        path = (self.root / filename).resolve()
        if not path.is_relative_to(self.root):
            return None
        try:
            seen = path.stat()
        except OSError:
            return None
        key = (seen.st_mtime_ns, seen.st_size)
        known = self._known.get(filename)
        if known and known[:2] == key:
            return known[2]
        try:
            digest = hashlib.sha256(path.read_bytes()).hexdigest()[:HASH_DIGITS]
        except OSError:
            return None
        with self._lock:
            self._known[filename] = (*key, digest)
        return digest

    def shell_files(self) -> list[str]:
        """The shell's files under static/, by name, sorted."""
        names = {path.relative_to(self.root).as_posix()
                 for folder in SHELL_FOLDERS if (self.root / folder).is_dir()
                 for path in (self.root / folder).rglob("*")
                 if path.is_file() and path.suffix in SHELL_SUFFIXES}
        names.update(name for name in SHELL_OTHERS if (self.root / name).is_file())
        return sorted(names - NOT_IN_SHELL)


def hashes() -> ContentHashes:
    return current_app.extensions["sparkward_assets"]  # type: ignore[no-any-return]


def _file_of(endpoint: str | None, values: dict[str, Any] | None) -> str | None:
    if endpoint == "static":
        return (values or {}).get("filename")
    if endpoint == "pwa.manifest":
        return MANIFEST_FILE
    return None


def _add_version(endpoint: str, values: dict[str, Any]) -> None:
    """URL default: a static file's URL carries its content hash."""
    if endpoint not in HASHED_ENDPOINTS or VERSION_ARG in values:
        return
    filename = _file_of(endpoint, values)
    digest = hashes().digest(filename) if filename else None
    if digest:
        values[VERSION_ARG] = digest


def current_version_requested() -> bool:
    """True when this request names a static file by its current hash: the answer will not
    change under that URL. An older hash (a page kept on a tablet from before an update)
    still gets the current file, 200 rather than 404 so that page keeps its styles and
    scripts, but not for keeps: that URL does not name these bytes."""
    filename = _file_of(request.endpoint, request.view_args)
    wanted = request.args.get(VERSION_ARG)
    return bool(filename and wanted and wanted == hashes().digest(filename))


def shell_urls() -> list[str]:
    """The shell's URLs as the pages name them (hashes included), manifest last."""
    urls = [url_for("static", filename=name) for name in hashes().shell_files()]
    return [*urls, url_for("pwa.manifest")]


def register(app: Flask) -> None:
    app.extensions["sparkward_assets"] = ContentHashes(Path(app.static_folder or "static"))
    app.url_defaults(_add_version)
