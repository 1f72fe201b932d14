"""`sparkward verify`: a signed record checks out; a byte flipped, content added afterwards, a
foreign CA or an edited log entry each make it fail, and say which."""

from __future__ import annotations

import io
from datetime import UTC, datetime

import pytest
from click.testing import CliRunner

from tests.conftest import DEMO_PINS
from tests.web.jobs import Job, _event
from webapp.cli import cli
from webapp.store import signers


@pytest.fixture
def signed(mechanic, db, clock, db_path, tmp_path):
    job = Job(mechanic, db, clock, "exciter-removal")
    job.walk_to("performer")
    job.ok(_event("performer", "signed", pin=DEMO_PINS["mech1"]))
    pdf = signers.latest_record(db, job.id)["pdf"]
    path = tmp_path / "record.pdf"
    path.write_bytes(pdf)
    return path, job


def _verify(path, db_path):
    return CliRunner().invoke(cli, ["verify", str(path), "--db", str(db_path)])


def test_untouched_record_checks_out(signed, db_path):
    path, job = signed
    result = _verify(path, db_path)
    assert result.exit_code == 0, result.output
    assert "Aino Varga" in result.output and "Performed" in result.output
    assert "intact" in result.output and "trusted" in result.output
    assert f"job {job.id}" in result.output
    assert "The record checks out: intact, trusted and the latest state." in result.output
    assert result.exit_code == 0


def test_one_byte_flipped_is_detected(signed, db_path):
    path, _ = signed
    pdf = bytearray(path.read_bytes())
    spot = pdf.index(b"Work record") + 2   # inside the signed byte range, not /Contents
    pdf[spot] ^= 0x01
    path.write_bytes(bytes(pdf))
    result = _verify(path, db_path)
    assert result.exit_code != 0
    assert "NOT INTACT" in result.output


def test_content_added_after_signing_is_reported(signed, db_path):
    from pyhanko.pdf_utils import generic
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter

    path, _ = signed
    writer = IncrementalPdfFileWriter(io.BytesIO(path.read_bytes()))
    writer.add_object(generic.DictionaryObject({generic.NameObject("/Note"):
                                                generic.TextStringObject("added later")}))
    writer.root["/Extra"] = generic.TextStringObject("added later")
    writer.update_root()
    out = io.BytesIO()
    writer.write(out)
    path.write_bytes(out.getvalue())
    result = _verify(path, db_path)
    assert result.exit_code != 0
    assert "CHANGED AFTERWARDS" in result.output


def test_a_signature_from_another_ca_is_untrusted(signed, db_path, tmp_path):
    import shutil

    from webapp.station.authority import authority_folder

    path, _ = signed
    # Another station: the same database, but its own certificate authority.
    other = tmp_path / "other.db"
    shutil.copyfile(db_path, other)
    assert not authority_folder(other).exists()
    result = _verify(path, other)
    assert result.exit_code != 0
    assert "NOT TRUSTED" in result.output


def test_a_log_entry_edited_after_signing_breaks_the_chain(signed, db_path, db):
    path, job = signed
    db.execute("drop trigger events_no_update")
    db.execute("update events set step_id = 'tampered' where job_id = ? and seq = 2", [job.id])
    db.conn.commit()
    result = _verify(path, db_path)
    assert result.exit_code != 0
    assert "no longer holds from entry 2" in result.output


def test_an_unsigned_or_unreadable_file_fails(tmp_path, db_path):
    junk = tmp_path / "junk.pdf"
    junk.write_bytes(b"not a pdf at all " + datetime.now(UTC).isoformat().encode())
    result = _verify(junk, db_path)
    assert result.exit_code != 0


def test_verify_page_reports_a_good_and_a_tampered_record(signed, login):
    path, _ = signed
    supervisor = login("super")
    good = supervisor.client.post("/records/verify", data={
        "csrf_token": supervisor.token, "record": (io.BytesIO(path.read_bytes()), "r.pdf")},
        content_type="multipart/form-data")
    assert good.status_code == 200 and "checks out" in good.get_data(as_text=True)
    pdf = bytearray(path.read_bytes())
    pdf[pdf.index(b"Work record") + 2] ^= 0x01
    bad = supervisor.client.post("/records/verify", data={
        "csrf_token": supervisor.token, "record": (io.BytesIO(bytes(pdf)), "r.pdf")},
        content_type="multipart/form-data")
    assert bad.status_code == 422 and "does not check out" in bad.get_data(as_text=True)
