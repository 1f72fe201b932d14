"""The work record as PDF: the record template rendered by WeasyPrint, our static files from disk.

The same HTML is what the review page shows (`record_html`); the PDF only adds
pages. WeasyPrint is imported on first use (it takes most of a second), keeps one
FontConfiguration for the process, and reads /static/ files from the shipped
folder instead of over HTTP: rendering a record never touches the network.
"""

from __future__ import annotations

import gc
import io
import mimetypes
import re
import threading
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from datetime import datetime
from functools import lru_cache
from pathlib import Path
from typing import Any
from urllib.parse import unquote, urlsplit

from flask import current_app
from jinja2 import StrictUndefined

from ..resources import shipped_dir
from ..store import Database
from .record_data import NONE, WorkRecord, gather
from .signing import StampBox

TEMPLATE = "records/work_record.html"
# The record's pages are placed at this made-up origin (".invalid" never resolves); the
# fetcher answers its /static/ URLs from disk and refuses every other URL.
STATION_ORIGIN = "https://station.invalid/"
STATIC_PREFIX = STATION_ORIGIN + "static/"

_render_lock = threading.Lock()  # one FontConfiguration is shared: render one at a time
# Elements whose id starts so are the boxes reserved for signatures still to come; the rest
# of the id is the signature's field name.
STAMP_ID_PREFIX = "stamp-"
# PDF/A-3b (ISO 19005-3, level B) as WeasyPrint writes it: header %PDF-1.7, an sRGB output
# intent, XMP identification pdfaid:part=3 and conformance=B; tagged (a structure tree and
# /MarkInfo /Marked true) so a screen reader reads the record in order. pyHanko's incremental
# signatures keep the catalog's /Metadata and /OutputIntents and merge into the XMP.
# The output intent is WeasyPrint's own sRGB profile, read here once and closed (WeasyPrint's
# "srgb" shortcut leaves the file open).
OUTPUT_INTENT = "station-srgb"
ARCHIVAL_PDF = {"pdf_variant": "pdf/a-3b", "pdf_tags": True, "output_intent": OUTPUT_INTENT}
_PT_PER_CSS_PX = 0.75  # 1 CSS px = 1/96 in, 1 pt = 1/72 in (CSS Values 3, absolute lengths)


def record_html(db: Database, job_id: int, now: datetime,
                signatures: Sequence[Mapping[str, Any]] | None = None, *,
                embedded: bool = False, record_id: str | None = None,
                record_revision: int = 1) -> str:
    """The work record as HTML (a whole document, or only the record when `embedded`).

    Needs an application context: the template comes from the app's Jinja environment.
    """
    record = gather(db, job_id, now, signatures, record_id, record_revision)
    return html_of(record, embedded=embedded)


def html_of(record: WorkRecord, *, embedded: bool = False) -> str:
    """The record template rendered; a name the template does not know is an error here, not
    a blank on a signed record."""
    environment = current_app.extensions.get("sparkward.record_jinja")
    if environment is None:
        environment = current_app.jinja_env.overlay(undefined=StrictUndefined)
        current_app.extensions["sparkward.record_jinja"] = environment
    return environment.get_template(TEMPLATE).render(r=record, embedded=embedded, NONE=NONE)


def render_for_signing(db: Database, job_id: int, now: datetime,
                       signatures: Sequence[Mapping[str, Any]], *,
                       record_revision: int = 1) -> tuple[bytes, dict[str, StampBox]]:
    """The record as PDF and, by field name, the box its layout reserves for each signature
    not among `signatures` (the ones already made print as text)."""
    html = record_html(db, job_id, now, signatures, record_revision=record_revision)
    return pdf_and_boxes(html)


RECORD_ID = re.compile(r"SW-\d{5}-\d{3}-[0-9A-F]{8}")


def printed_record_id(pdf: bytes) -> str | None:
    """The record id a stored PDF carries in its title (the id printed on each page), read
    back from the file so a screen shows exactly the id of the PDF it links to."""
    from pyhanko.pdf_utils.reader import PdfFileReader

    try:
        info = PdfFileReader(io.BytesIO(pdf), strict=False).trailer["/Info"]
        found = RECORD_ID.search(str(info.get("/Title", "")))
    except Exception:   # an unreadable file has no id to show; the verify page says why
        return None
    return found.group(0) if found else None


def pdf_of_html(html: str) -> bytes:
    """Print record HTML to PDF with the station's fonts and static files."""
    return pdf_and_boxes(html)[0]


def pdf_and_boxes(html: str) -> tuple[bytes, dict[str, StampBox]]:
    """Print record HTML to PDF; also where each signature box landed, in PDF points."""
    weasyprint = _weasyprint()
    document = weasyprint.HTML(string=html, base_url=STATION_ORIGIN, url_fetcher=static_fetcher())
    with _render_lock, _collector_paused():
        laid_out = document.render(font_config=font_configuration(),
                                   color_profiles={OUTPUT_INTENT: _srgb_profile()})
        boxes = {}
        for number, page in enumerate(laid_out.pages):
            height = page.height * _PT_PER_CSS_PX
            for anchor, (x1, y1, x2, y2) in page.anchors.items():
                if anchor.startswith(STAMP_ID_PREFIX):
                    boxes[anchor.removeprefix(STAMP_ID_PREFIX)] = StampBox(number, (
                        x1 * _PT_PER_CSS_PX, height - y2 * _PT_PER_CSS_PX,
                        x2 * _PT_PER_CSS_PX, height - y1 * _PT_PER_CSS_PX))
        return laid_out.write_pdf(finisher=_info_without_producer, **ARCHIVAL_PDF), boxes


def _info_without_producer(document: Any, pdf: Any) -> None:
    """PDF/A wants each document-information entry equal to its XMP twin. pyHanko's
    signatures append themselves to an Info /Producer but write only their own name to the
    XMP pdf:Producer, so the two would differ after the first signature; without an Info
    /Producer, pyHanko writes the same name to both (the XMP keeps WeasyPrint's until then)."""
    pdf.info.pop("Producer", None)


@contextmanager
def _collector_paused() -> Iterator[None]:
    """Python's cycle collector off while a record is laid out and written.

    A render makes some hundred thousand objects that live until it ends; the collector
    would walk them again and again for nothing (a quarter of the render time, measured by
    bench/record_render.py). Reference counting still frees as usual, and the cycles left
    are collected after the render.
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()


@lru_cache(maxsize=1)
def _weasyprint() -> Any:
    import weasyprint

    return weasyprint


@lru_cache(maxsize=1)
def _srgb_bytes() -> bytes:
    from importlib.resources import files

    return (files("weasyprint.pdf") / "sRGB2014.icc").read_bytes()


def _srgb_profile() -> Any:
    """The sRGB profile (IEC 61966-2-1) of the record's output intent, one per render (the
    PDF writer stores its object number on it)."""
    from weasyprint.css import ColorProfile

    return ColorProfile(io.BytesIO(_srgb_bytes()), "sRGB2014.icc", "relative-colorimetric",
                        (["r"], ["g"], ["b"]))


@lru_cache(maxsize=1)
def font_configuration() -> Any:
    """The process's one FontConfiguration (building one per record costs time)."""
    from weasyprint.text.fonts import FontConfiguration

    return FontConfiguration()


def static_path(url: str) -> Path:
    """The file a station /static/ URL names, inside the shipped static folder.

    Raises ValueError for any other URL (nothing is fetched from elsewhere) and
    FileNotFoundError for a file that is not there.
    """
    if not url.startswith(STATIC_PREFIX):
        raise ValueError(f"the work record fetches only the station's static files, not {url}")
    root = shipped_dir("static").resolve()
    path = (root / unquote(urlsplit(url).path).removeprefix("/static/")).resolve()
    if not path.is_relative_to(root) or not path.is_file():
        raise FileNotFoundError(f"no static file for {url}")
    return path


@lru_cache(maxsize=1)
def static_fetcher() -> Any:
    """A WeasyPrint URL fetcher that reads /static/ from disk; any failure stops the render
    (a record without its layout must not go out looking complete)."""
    from weasyprint.urls import URLFetcher, URLFetcherResponse

    class StaticFileFetcher(URLFetcher):
        def fetch(self, url: str, headers: Any = None) -> URLFetcherResponse:
            path = static_path(url)
            mime = mimetypes.guess_type(path.name)[0] or "application/octet-stream"
            return URLFetcherResponse(url, path.read_bytes(), {"Content-Type": mime})

    return StaticFileFetcher(fail_on_errors=True, allowed_protocols=("https",))
