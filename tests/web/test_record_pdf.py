"""The PDF work record: what the regulations ask a maintenance record to show, read back
from the PDF's own text with pypdf.

The job: igniter plug replacement on DEMO-101 engine 1, channel B (demo data), walked
to its first sign step by two mechanics, with a handover of a tag, a reading entered in
inches, and a failed inspection re-tested after its finding.
"""

from __future__ import annotations

import io
import re
from datetime import timedelta

import pytest
from pypdf import PdfReader

from tests.conftest import DEMO_PINS
from tests.web.jobs import DEMO_101_ENGINE_1, Job, _event
from webapp.records import pdf
from webapp.station import recording
from webapp.store import jobs as job_store

PROCEDURE = "igniter-plug-replacement"


@pytest.fixture
def plug_job(app, db, clock, mechanic, login):
    """The job at its first sign step; returns its id."""
    job = Job(mechanic, db, clock, PROCEDURE, channel="B", engine=DEMO_101_ENGINE_1)
    job.walk_to("hot-case")  # both breakers tagged by mech1: T-1 on IGN-A, T-2 on IGN-B
    reyes = login("mech2")
    job.ok(_event(None, "tag_handed_over", tag="T-2", to="mech2", pin=DEMO_PINS["mech1"]))
    job.ok(_event(None, "tag_taken_over", tag="T-2", breaker_confirmed_open=True), reyes)
    job.walk_to("erosion")
    job.ok(_event("erosion", "reading_recorded", instrument_id="EG-011", value="0.044", unit="in",
                  usage={"engine_hours": 812, "starts": 760, "continuous_ignition_hours": 150}),
           reyes)
    job.walk_to("carbon")
    job.ok(_event("carbon", "reading_recorded", result="fail"))
    job.ok(_event("carbon", "finding", text="Light carbon on the shell face; wiped dry as "
                  "the data allows and inspected again", disposition="re-tested"))
    job.ok(_event("carbon", "reading_recorded", result="pass"))
    job.walk_to("performer")
    assert job.state()["next_step"] == "performer"
    return job.id


def _render(app, db, job_id, now, signatures=None):
    with app.app_context():
        data, _ = pdf.render_for_signing(db, job_id, now, signatures or [])
    assert data.startswith(b"%PDF-")
    reader = PdfReader(io.BytesIO(data))
    pages = [page.extract_text() for page in reader.pages]
    text = " ".join(" ".join(pages).split())
    return reader, pages, text


def test_14_cfr_43_9_a_four_elements_of_the_maintenance_record(app, db, clock, plug_job):
    _, _, text = _render(app, db, plug_job, clock())
    # 14 CFR 43.9(a)(1): a description of the work or a reference to data acceptable to the
    # Administrator: the procedure, and the approved data it was performed in accordance with.
    assert "Igniter plug — removal, inspection and installation" in text
    assert ("Performed in accordance with the approved data QT-610 Engine Maintenance Manual "
            "(demo data), 74-20-11") in text
    assert "Rev 9, 2025-11-18" in text
    assert "The approved data governs" in text
    # 14 CFR 43.9(a)(2): the date the work was completed (the last work step; the signatures
    # that follow are not work).
    last_work = job_store.events(db, plug_job)[-1]["received_at"]
    assert f"Work completed {last_work[:10]} {last_work[11:19]} UTC; signatures in section 9" \
        in text
    # 14 CFR 43.9(a)(3): the name of each person who did the work (with authorisation numbers).
    for name, number in (("Aino Varga", "BCA-M-0147"), ("Tomas Reyes", "BCA-M-0152")):
        assert name in text and number in text
    # 14 CFR 43.9(a)(4): the signature with certificate number and kind of certificate.
    # Unsigned here: each signature has its box, which its stamp fills when signed (the
    # stamp's content is checked on a signed record in test_signature_stamps.py).
    number = {s.id: s.number for s in recording.load_job(db, plug_job).state.steps}
    assert f"Step {number['performer']}: Performer" in text
    assert f"Step {number['inspector']}: Inspector" in text
    assert f"Step {number['certify']}: Certifying" in text
    assert text.count("Signature box:") == 3
    assert "printed name, authorisation number and its kind" in text
    # The header: aircraft, engine serial and position, channel (common practice, no source).
    for shown in ("DEMO-101", "QT6-10231", "Engine position 1", "Ignition channel B"):
        assert shown in text


def test_easa_145_a_50_release_to_service_content(app, db, clock, plug_job):
    _, _, text = _render(app, db, plug_job, clock())
    # EASA Part-145 145.A.50 and its AMC: the organisation and its approval reference, the
    # certifying staff and their licence number, the completion, and any limitations, even none.
    assert "Bramblecoast Air (demo)" in text and "DEMO.145.0042" in text
    assert "Release to service" in text
    assert "Certifying staff (printed name)" in text
    assert "Licence / authorisation no." in text
    # The plug change leaves its seat leak check for the next engine run: a limitation.
    assert (f"Limitations open item J{plug_job}-seat-leak-due (job {plug_job}): Igniter plug "
            "seat leak check at the next engine run after the plug change (channel B); "
            "limit next engine run") in text
    # The plug came off and a new one went on: until a functional check passes on the
    # channel, no certification of this job releases the aircraft, and the record says so.
    assert "This record does not release the aircraft to service" in text
    assert ("Not released to service — as the engine stands at printing; the certifying "
            "signature's stamp states what was given") in text
    assert "a functional check of channel B is due after the work of job" in text
    # The procedure's requirements after completion travel with the release block.
    assert "functional (audible) check of the ignition system must pass" in text


def test_21_cfr_11_50_signature_shows_printed_name_time_with_zone_and_meaning(
        app, db, clock, plug_job):
    signed_at = clock() + timedelta(minutes=5)
    signature = {"name": "Aino Varga", "authorisation": "BCA-M-0147",
                 "meaning": "performed the work", "signed_at": signed_at,
                 "kind": "mechanic authorisation"}
    _, _, text = _render(app, db, plug_job, clock(), [signature])
    # 21 CFR 11.50(a)(1)-(3): printed name, date and time of signing, and its meaning.
    when = signed_at.strftime("%Y-%m-%d %H:%M:%S UTC")
    assert (f"Signed electronically by Aino Varga (BCA-M-0147) on {when}; meaning: performed "
            "the work.") in text
    assert "mechanic authorisation" in text
    assert text.count("Signature box:") == 2  # the inspector's and the certifier's still open
    # 21 CFR 11.50(b): the same manifestation on the screen as on paper.
    with app.app_context():
        html = pdf.record_html(db, plug_job, clock(), [signature], embedded=True)
    assert "<html" not in html
    assert "Signed electronically by Aino Varga (BCA-M-0147) on " + when in html


def test_21_cfr_11_10_readings_gates_hashes_and_pages_in_readable_form(
        app, db, clock, plug_job):
    reader, pages, text = _render(app, db, plug_job, clock())
    packed = "".join(text.split())
    events = job_store.events(db, plug_job)
    job = job_store.job(db, plug_job)
    # 21 CFR 11.10(e) audit trail and 11.70 linking: the record names the revision it was
    # done to and the head of the job's hash chain it was printed from.
    assert job["revision_hash"] in packed
    assert events[-1]["hash"] in packed
    assert f"{len(events)} entries, intact" in text
    # 21 CFR 11.10(b): accurate and complete copies in human-readable form. Readings: value
    # as entered, converted to the data's unit, limits, verdict and disposition.
    assert "0.044 in → 1.118 mm" in text
    assert "at most 1.2 mm" in text and "▲ near limit" in text
    assert "275 lbf·in → 275 lbf·in" in text and "250 to 300 lbf·in" in text
    assert "✓ within" in text and "✗ out of limits" in text
    assert "Light carbon on the shell face" in text and "re-tested" in text
    assert "torque wrench TW-017" in text and "2027-06-30" in text
    # Each instrument from the register against the reading it took (demo register data).
    assert "Instruments with calibration" in text
    assert "erosion gauge EG-011 (range 0–3 mm), calibration due 2027-07-31" in text
    assert "torque wrench TW-031 (range 100–600 lbf·in), calibration due 2027-09-30" in text
    # Lockout/tagout (29 CFR 1910.147(d)-(e) order of work): tags, breakers, the handover,
    # the power-off time and the discharge wait served.
    for shown in ("T-1", "T-2", "IGN-A", "IGN-B", "taken over"):
        assert shown in text
    assert re.search(r"Tag T-2 on IGN-B .* handed over from Aino Varga, BCA-M-0147 to "
                     r"Tomas Reyes, BCA-M-0152 .*; consented by the owner, Aino Varga", text)
    assert "exciter input disconnected (power off)" in text
    assert "Wait served 2:00" in text
    # Parts at work and as recorded (common practice, no source: P/N and S/N removed and fitted).
    assert "XIP-2207" in text and "XP-4402" in text
    # The wear chart of the plug gauged on the job is drawn (its limit label is SVG text).
    assert "limit 1.20 mm" in text and "Igniter plug wear · XIP-2207 S/N XP-4402" in text
    # Every page: the record id at the top and "Page n of m" at the foot.
    assert re.search(r"Page 1 of \d+", pages[0])
    assert f"Page {len(reader.pages)} of {len(reader.pages)}" in pages[-1]
    record_id = re.search(r"Record (SW-\d{5}-\d{3}-[0-9A-F]{8})", pages[0]).group(1)
    assert all(record_id in page for page in pages)
    # The safety notice every record carries: the approved data and regulations govern;
    # computations are advisory (common practice, no source).
    assert "computations are advisory" in text and "WARNING" in text and "NOTE" in text


def test_record_fetches_only_the_station_static_files_from_disk():
    # No regulation: the house rule (TOOLCHAIN.md) that rendering never goes to the network.
    fetcher = pdf.static_fetcher()
    answer = fetcher.fetch(pdf.STATIC_PREFIX + "css/record.css")
    assert b"@page" in answer.read()
    assert "css" in answer.content_type
    with pytest.raises(ValueError):
        fetcher.fetch("https://elsewhere.invalid/static/css/record.css")
    with pytest.raises(FileNotFoundError):
        fetcher.fetch(pdf.STATIC_PREFIX + "../webapp/__init__.py")
    assert pdf.font_configuration() is pdf.font_configuration()  # one per process


def test_release_limitations_say_none_when_the_engine_has_no_open_item(app, db, clock,
                                                                        mechanic):
    # EASA Part-145 145.A.50 AMC: the limitations are stated even when there are none.
    job = Job(mechanic, db, clock, "ignition-lead-inspection", channel="A", engine=3)
    job.walk_to("performer")  # DEMO-102 engine 1: no open item in the demo
    _, _, text = _render(app, db, job.id, clock())
    assert "Limitations none" in text
