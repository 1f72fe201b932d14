"""Visible signatures: every signature on a record shows on the printed page, in its box.

The exciter installation (demo data) is signed by its performer (mech1) and then by an
independent inspector (mech2). The inspector signs later, on the same file: the record
reserved the inspector's box when the performer signed, and the inspector's signature
fills it with a stamp, so the paper copy shows both signatures (21 CFR 11.50).

The stamps are read back with Debian's `pdftotext` (tests/pdf_text.py), which draws the
page as a PDF reader does, annotation appearances included.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from pypdf import PdfReader

from tests.conftest import DEMO_PINS
from tests.pdf_text import pdf_pages_text
from tests.web.jobs import Job, _event, exciter_removed
from webapp.records.signing import empty_signature_fields, verify_record
from webapp.records.verify import check_record
from webapp.station.authority import station_authority
from webapp.store import jobs as job_store
from webapp.store import signers


@pytest.fixture
def installation(login, db, clock):
    exciter_removed(login("mech1"), db, clock)
    job = Job(login("mech1"), db, clock, "exciter-installation")
    job.walk_to("performer")
    return job


def _widgets(pdf: bytes, tmp_path: Path) -> dict[str, tuple[int, list[float]]]:
    """Signature field name -> (page index, its rectangle in points)."""
    path = tmp_path / "widgets.pdf"
    path.write_bytes(pdf)
    found = {}
    for index, page in enumerate(PdfReader(path).pages):
        for annotation in page.get("/Annots") or []:
            widget = annotation.get_object()
            if widget.get("/FT") == "/Sig":
                found[str(widget["/T"])] = (index, [float(v) for v in widget["/Rect"]])
    return found


def test_each_signature_is_stamped_in_its_box_with_name_number_meaning_and_time(
        installation, login, db, clock, app, tmp_path):
    performer_at = clock()
    installation.ok(_event("performer", "signed", pin=DEMO_PINS["mech1"]))
    first = signers.latest_record(db, installation.id)["pdf"]
    # The inspector's and the certifier's boxes are reserved, empty, when the performer signs.
    assert empty_signature_fields(first) == ["inspector", "certify"]
    clock.advance(7 * 60)
    inspector_at = clock()
    installation.ok(_event("inspector", "signed", pin=DEMO_PINS["mech2"]),
                    client=login("mech2"))
    record = signers.latest_record(db, installation.id)
    signed = record["pdf"]
    assert signed.startswith(first)           # incremental: the first file is kept byte for byte
    assert empty_signature_fields(signed) == ["certify"]

    pages = pdf_pages_text(signed, tmp_path)
    text = " ".join(pages)
    # 21 CFR 11.50(a): printed name, date and time, and meaning, for each signature; 14 CFR
    # 43.9(a)(4): with the certificate (authorisation) number and its kind, those of the
    # authorisation the signature rests on (the demo's, invented).
    for name, number, meaning, at in (
            ("Aino Varga", "BCA-CA-0147", "Performed", performer_at),
            ("Tomas Reyes", "BCA-CA-0152", "Inspected", inspector_at)):
        assert f"Signed electronically by {name}" in text
        assert (f"Authorisation no. {number} (Company authorisation (demo) — mechanic)"
                in text)
        assert f"Meaning: {meaning} (this job's work only)" in text
        assert f"Date and time: {at:%Y-%m-%d %H:%M:%S} UTC" in text

    # Each stamp sits in the box the record drew for it: on the page of its sign step,
    # above that box's caption, and the two do not overlap.
    widgets = _widgets(signed, tmp_path)
    # (The document time-stamps after each signature's validation data are invisible.)
    assert {f for f in widgets if not f.startswith("Timestamp-")} == {
        "performer", "inspector", "certify"}
    numbers = {s["id"]: s["number"] for s in installation.state()["steps"]}
    for field, heading in (("performer", f"Step {numbers['performer']}: Performer"),
                           ("inspector", f"Step {numbers['inspector']}: Inspector")):
        page, (x1, y1, x2, y2) = widgets[field]
        assert heading in pages[page]
        # The box is 150 mm by 27 mm inside a 0.75 pt border in record.css (1 mm = 72/25.4
        # pt): the stamp covers the border box.
        assert x2 - x1 == pytest.approx(150 * 72 / 25.4 + 1.5, abs=0.01)
        assert y2 - y1 == pytest.approx(27 * 72 / 25.4 + 1.5, abs=0.01)
    (p1, a), (p2, b) = widgets["performer"], widgets["inspector"]
    assert p1 != p2 or a[3] <= b[1] or b[3] <= a[1]

    # Filling a reserved box is form filling: the performer's signature stays good.
    authority = station_authority(app.config["DB_PATH"], "x", clock())
    reports = verify_record(signed, authority.cert)
    assert [r.field_name for r in reports] == ["performer", "inspector"]
    assert all(r.intact and r.valid and r.trusted and not r.modified_after for r in reports)


def test_verify_names_the_boxes_still_empty(installation, db, clock, app):
    installation.ok(_event("performer", "signed", pin=DEMO_PINS["mech1"]))
    pdf = signers.latest_record(db, installation.id)["pdf"]
    authority = station_authority(app.config["DB_PATH"], "x", clock())
    result = check_record(pdf, authority.cert, lambda job_id: job_store.events(db, job_id),
                          lambda job_id: signers.stored_states(db, job_id))
    assert result.ok                       # a record signed so far is intact, and the latest
    assert result.unsigned == ["inspector", "certify"]


def test_a_name_outside_latin_1_is_stamped_as_written(installation, db, clock, app, tmp_path):
    # The stamp embeds DejaVu Sans; a name in Latin Extended or Greek letters must print as
    # entered, not as question marks or a failed signature.
    db.execute("update people set full_name = ? where username = 'mech1'",
               ["Łucja Dvořák-Παπαδοπούλου"])
    db.conn.commit()
    installation.ok(_event("performer", "signed", pin=DEMO_PINS["mech1"]))
    text = " ".join(pdf_pages_text(signers.latest_record(db, installation.id)["pdf"], tmp_path))
    assert "Signed electronically by Łucja Dvořák-Παπαδοπούλου" in text
