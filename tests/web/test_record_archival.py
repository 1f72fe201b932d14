"""The signed work record is an archival, tagged PDF: PDF/A-3b identification, an sRGB output
intent and a structure tree, kept through the station's incremental signatures.

No PDF/A validator runs offline here (veraPDF is a Java program, not on these machines), so
the tests read the identifiers a validator starts from, with pypdf, from a record signed
through the station twice (performer, then inspector, each followed by a document
time-stamp): the incremental updates must not drop or rewrite them.
"""

from __future__ import annotations

import io
import re
import xml.etree.ElementTree as ET

import pytest
from pypdf import PdfReader

from tests.conftest import DEMO_PINS
from tests.web.jobs import Job, _event, exciter_removed
from webapp.records import pdf
from webapp.store import signers

# ISO 19005-3:2012 6.6.4 and Annex: the PDF/A identification schema's namespace.
PDFAID = "http://www.aiim.org/pdfa/ns/id/"
RDF = "http://www.w3.org/1999/02/22-rdf-syntax-ns#"
DC = "http://purl.org/dc/elements/1.1/"


@pytest.fixture
def signed_twice(login, db, clock):
    exciter_removed(login("mech1"), db, clock)
    job = Job(login("mech1"), db, clock, "exciter-installation")
    job.walk_to("performer")
    job.ok(_event("performer", "signed", pin=DEMO_PINS["mech1"]))
    first = signers.latest_record(db, job.id)["pdf"]
    clock.advance(5 * 60)
    job.ok(_event("inspector", "signed", pin=DEMO_PINS["mech2"]), client=login("mech2"))
    signed = signers.latest_record(db, job.id)["pdf"]
    assert signed.startswith(first) and len(signed) > len(first)   # incremental updates
    return first, signed


def _pdfaid(data: bytes) -> dict[str, str]:
    """The pdfaid properties of the catalog's XMP packet, written as attributes or elements."""
    root = PdfReader(io.BytesIO(data)).trailer["/Root"]
    xmp = ET.fromstring(root["/Metadata"].get_object().get_data())
    found = {}
    for description in xmp.iter(f"{{{RDF}}}Description"):
        for name, value in description.attrib.items():
            if name.startswith(f"{{{PDFAID}}}"):
                found[name.removeprefix(f"{{{PDFAID}}}")] = value
        for child in description:
            if child.tag.startswith(f"{{{PDFAID}}}"):
                found[child.tag.removeprefix(f"{{{PDFAID}}}")] = (child.text or "").strip()
    return found


def _xmp_title(data: bytes) -> str:
    root = PdfReader(io.BytesIO(data)).trailer["/Root"]
    xmp = ET.fromstring(root["/Metadata"].get_object().get_data())
    return " ".join(li.text or "" for title in xmp.iter(f"{{{DC}}}title")
                    for li in title.iter(f"{{{RDF}}}li"))


@pytest.mark.parametrize("which", ["first signature", "second signature"])
def test_pdfa_3b_identification_survives_each_incremental_signature(signed_twice, which):
    data = signed_twice[0 if which == "first signature" else 1]
    # ISO 19005-3 6.6.4: part 3, conformance level B, in the XMP identification schema.
    assert _pdfaid(data) == {"part": "3", "conformance": "B"}
    # ISO 19005-3 6.1.2: the header is %PDF-1.n with n from 0 to 7 (PDF/A-3 is PDF 1.7).
    assert re.match(rb"%PDF-1\.[0-7]\r?\n", data[:10])
    # The record id is the document's title, in the XMP packet a reader and an archive see.
    assert re.fullmatch(r"Work record SW-\d{5}-\d{3}-[0-9A-F]{8} · job \d+", _xmp_title(data))


def test_srgb_output_intent_and_structure_tree_after_two_signatures(signed_twice):
    _, signed = signed_twice
    root = PdfReader(io.BytesIO(signed)).trailer["/Root"]
    # ISO 19005-3 6.2.3: one PDF/A output intent (/S /GTS_PDFA1) with an ICC profile.
    intents = [i.get_object() for i in root["/OutputIntents"]]
    assert [str(i["/S"]) for i in intents] == ["/GTS_PDFA1"]
    profile = intents[0]["/DestOutputProfile"].get_object()
    assert profile["/N"] == 3                                   # three components: RGB
    icc = profile.get_data()
    # ICC.1:2010 7.2: bytes 16-19 the data colour space ("RGB "), 36-39 the signature "acsp".
    assert icc[16:20] == b"RGB " and icc[36:40] == b"acsp"
    assert "sRGB" in str(intents[0]["/OutputConditionIdentifier"])
    # ISO 32000-1 14.7 and 14.8: a tagged PDF has a structure tree and says it is marked;
    # 14.9.2: the document's language, for a screen reader.
    tree = root["/StructTreeRoot"].get_object()
    assert tree["/K"] and str(tree["/Type"]) == "/StructTreeRoot"
    assert bool(root["/MarkInfo"]["/Marked"]) is True
    assert str(root["/Lang"]) == "en"
    # Each page's content is tied to the tree (ISO 32000-1 14.7.4.4: /StructParents).
    for page in PdfReader(io.BytesIO(signed)).pages:
        assert "/StructParents" in page


PDF_NS = "http://ns.adobe.com/pdf/1.3/"


def _xmp_producer(data: bytes) -> str | None:
    root = PdfReader(io.BytesIO(data)).trailer["/Root"]
    xmp = ET.fromstring(root["/Metadata"].get_object().get_data())
    for description in xmp.iter(f"{{{RDF}}}Description"):
        if f"{{{PDF_NS}}}Producer" in description.attrib:
            return description.attrib[f"{{{PDF_NS}}}Producer"]
        child = description.find(f"{{{PDF_NS}}}Producer")
        if child is not None:
            return (child.text or "").strip()
    return None


@pytest.mark.parametrize("which", ["first signature", "second signature"])
def test_document_information_equals_its_xmp_twin_after_each_signature(signed_twice, which):
    # ISO 19005-2 and -3, 6.6.2.3.1 (from memory): each document-information entry present
    # shall be equivalent to its XMP property: /Title to dc:title, /Producer to pdf:Producer.
    data = signed_twice[0 if which == "first signature" else 1]
    info = PdfReader(io.BytesIO(data)).trailer["/Info"]
    assert str(info["/Title"]) == _xmp_title(data)
    if "/Producer" in info:
        assert str(info["/Producer"]) == _xmp_producer(data)
    assert not {"/Author", "/Subject", "/Keywords", "/Creator"} & set(info)


def _catalog_version(data: bytes) -> str | None:
    version = PdfReader(io.BytesIO(data)).trailer["/Root"].get("/Version")
    return str(version).lstrip("/") if version is not None else None


def test_a_fresh_print_has_no_catalog_version_that_disagrees_with_its_header(
        app, db, clock, login):
    # ISO 32000-1 7.7.2: a catalog /Version later than the header's overrides it; the
    # fresh print must not declare any other version than its header.
    job = Job(login("mech1"), db, clock, "ignition-lead-inspection", channel="A", engine=3)
    job.walk_to("performer")
    with app.app_context():
        data, _ = pdf.render_for_signing(db, job.id, clock(), [])
    assert data.startswith(b"%PDF-1.7")
    assert _catalog_version(data) in (None, "1.7")


def test_signed_record_keeps_catalog_version_consistent_with_its_header(signed_twice):
    _, signed = signed_twice
    assert signed.startswith(b"%PDF-1.7")
    assert _catalog_version(signed) in (None, "1.7")
