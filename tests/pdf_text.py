"""A PDF's text as a reader shows it, signature stamps included.

Debian's `pdftotext` (poppler-utils) draws each page as a PDF reader does, annotation
appearances (the signature stamps) included; pypdf reads the page content only.
"""

from __future__ import annotations

import subprocess
from pathlib import Path


def pdf_pages_text(pdf: bytes, folder: Path) -> list[str]:
    """Each page's text, whitespace folded to single spaces."""
    path = folder / "read-back.pdf"
    path.write_bytes(pdf)
    done = subprocess.run(["pdftotext", "-layout", str(path), "-"], capture_output=True,
                          text=True, check=True, timeout=60)
    return [" ".join(page.split()) for page in done.stdout.split("\f")]


def pdf_text(pdf: bytes, folder: Path) -> str:
    return " ".join(pdf_pages_text(pdf, folder))
