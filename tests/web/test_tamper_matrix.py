"""The tamper matrix: what `sparkward verify` (exit code and words) and pyHanko's own
validation API (not our wrapper) say of a signed record after each kind of change, and of
files that are honest but not the latest: an earlier state, one cut back at an earlier end
of file, a superseded revision.

Exit codes (`sparkward verify --help`): 0 intact and latest, 1 intact but superseded or
incomplete, 2 altered, untrusted or not a file the station issued. What counts as a
forbidden change of a certified record: ISO 32000-1 12.8.2.2 (DocMDP, P = 2)."""

from __future__ import annotations

import io
import re

import pytest
from click.testing import CliRunner
from pyhanko.pdf_utils.reader import PdfFileReader
from pyhanko.pdf_utils.writer import copy_into_new_writer
from pyhanko.sign.diff_analysis import ModificationLevel
from pyhanko.sign.validation import validate_pdf_signature
from pyhanko_certvalidator import ValidationContext

from tests.conftest import DEMO_PINS, csrf_token_of
from tests.pdf_tamper import appended
from tests.web.jobs import _event, functional_check_counted
from webapp.cli import cli
from webapp.records.identity import asn1_certificate
from webapp.records.signing import _off_thread
from webapp.station.authority import station_authority
from webapp.store import signers


@pytest.fixture
def check(login, db, clock):
    """A functional check signed by both mechanics (the station keeps two states)."""
    mech1, mech2 = login("mech1"), login("mech2")
    job = functional_check_counted(mech1, mech2, db, clock)
    job.ok(_event("sign-selector", "signed", pin=DEMO_PINS["mech1"]))
    clock.advance(60)
    job.ok(_event("sign-engine", "signed", pin=DEMO_PINS["mech2"]), client=mech2)
    return job


def _verify(pdf: bytes, tmp_path, db_path):
    path = tmp_path / "record.pdf"
    path.write_bytes(pdf)
    result = CliRunner().invoke(cli, ["verify", str(path), "--db", str(db_path)])
    assert "Traceback" not in result.output
    return result


def _pyhanko(pdf: bytes, db_path, clock):
    """pyHanko's verdict on each person's signature: (intact, valid, modification level)."""
    ca = station_authority(db_path, "x", clock()).cert

    def run():
        reader = PdfFileReader(io.BytesIO(pdf))
        context = ValidationContext(trust_roots=[asn1_certificate(ca)], allow_fetching=False)
        return [(s.intact, s.valid, s.modification_level, s.docmdp_ok) for s in (
            validate_pdf_signature(sig, context) for sig in reader.embedded_signatures
            if sig.sig_object_type == "/Sig")]
    return _off_thread(run)


def _resaved(pdf: bytes) -> bytes:
    """Opened and saved whole by a PDF library, as an editor would: no incremental update."""
    def run():
        writer = copy_into_new_writer(PdfFileReader(io.BytesIO(pdf)))
        out = io.BytesIO()
        writer.write(out)
        return out.getvalue()
    return _off_thread(run)


def _without_last_signature(pdf: bytes) -> bytes:
    """The signature dictionary of the last signed field blanked (a signature "removed")."""
    text = bytearray(pdf)
    starts = [m.start() for m in re.finditer(rb"/Contents <", pdf)]
    at = starts[1] + len(b"/Contents <")   # the second person's signature value
    end = pdf.index(b">", at)
    text[at:end] = b"0" * (end - at)
    return bytes(text)


def test_the_untouched_latest_record_checks_out(check, db, db_path, tmp_path, clock):
    latest = signers.latest_record(db, check.id)["pdf"]
    result = _verify(latest, tmp_path, db_path)
    assert result.exit_code == 0, result.output
    assert "the latest state of revision 1" in result.output
    assert all(intact and valid for intact, valid, _, _ in _pyhanko(latest, db_path, clock))
    # Header and catalog agree on the version through every incremental signature (ISO
    # 32000-1 7.5.2: a catalog /Version, if any, must not contradict what the file is).
    catalog = PdfFileReader(io.BytesIO(latest)).root.get("/Version")
    assert latest.startswith(b"%PDF-1.7") and catalog in (None, "/1.7"), catalog


@pytest.mark.parametrize("change", ["byte flipped", "content", "annotation", "re-saved",
                                    "signature removed"])
def test_every_change_fails_in_verify_and_in_pyhanko(check, db, db_path, tmp_path, clock,
                                                     change):
    latest = signers.latest_record(db, check.id)["pdf"]
    if change == "byte flipped":
        altered = bytearray(latest)
        spot = latest.index(b"/Title") + 3          # inside the first signed range
        altered[spot] ^= 0x01
        altered = bytes(altered)
    elif change in ("content", "annotation"):
        altered = appended(latest, change, b"36")
    elif change == "re-saved":
        altered = _resaved(latest)
    else:
        altered = _without_last_signature(latest)
    result = _verify(altered, tmp_path, db_path)
    assert result.exit_code == 2, result.output
    assert "does NOT check out" in result.output and "problem:" in result.output
    try:
        verdicts = _pyhanko(altered, db_path, clock)
    except Exception:   # pyHanko cannot even read the signatures: not valid either
        return
    if change in ("content", "annotation"):
        # Appended after certification: a forbidden change, in pyHanko's own words.
        for intact, valid, level, docmdp_ok in verdicts:
            assert intact and valid
            assert level == ModificationLevel.OTHER and docmdp_ok is False
    else:
        assert not all(intact and valid for intact, valid, _, _ in verdicts) or not verdicts


def test_an_earlier_state_is_intact_but_incomplete_naming_the_later_signature(
        check, db, db_path, tmp_path):
    first, second = signers.stored_states(db, check.id)
    result = _verify(bytes(first["pdf"]), tmp_path, db_path)
    assert result.exit_code == 1, result.output
    assert "incomplete: an earlier state of revision 1" in result.output
    assert "signatures beyond it: sign-engine" in result.output
    assert "checks out" not in result.output


def test_a_record_cut_back_at_an_earlier_end_of_file_is_incomplete(check, db, db_path,
                                                                   tmp_path):
    latest = bytes(signers.latest_record(db, check.id)["pdf"])
    ends = [m.end() for m in re.finditer(rb"%%EOF\r?\n?", latest)]
    cut = latest[:ends[-2]]       # the last update (a document time-stamp) taken off
    result = _verify(cut, tmp_path, db_path)
    assert result.exit_code == 1, result.output
    assert "cut back at an earlier end of file of revision 1" in result.output


def test_a_superseded_revision_names_the_revision_that_replaced_it(check, db, db_path,
                                                                   tmp_path, login):
    superseded = bytes(signers.latest_record(db, check.id)["pdf"])
    supervisor = login("super").client
    page = supervisor.get(f"/review/{check.id}").get_data(as_text=True)
    supervisor.post(f"/review/{check.id}", data={
        "action": "return", "reason": "Channel B count taken with the GPU off",
        "csrf_token": csrf_token_of(page)})
    check.ok(_event("sign-selector", "signed", pin=DEMO_PINS["mech1"]))
    newer = signers.latest_record(db, check.id)
    result = _verify(superseded, tmp_path, db_path)
    assert result.exit_code == 1, result.output
    assert "superseded by revision 2 (record SW-" in result.output
    assert "reason: returned: Channel B count taken with the GPU off" in result.output
    assert newer["revision"] == 2
    # The "Check a record" page says the same, never the plain "checks out".
    page = supervisor.get("/records/verify").get_data(as_text=True)
    answer = supervisor.post("/records/verify", data={
        "record": (io.BytesIO(superseded), "record.pdf"),
        "csrf_token": csrf_token_of(page)}, content_type="multipart/form-data")
    html = answer.get_data(as_text=True)
    assert "intact but not the latest: superseded by revision 2" in html
    assert "checks out" not in html
