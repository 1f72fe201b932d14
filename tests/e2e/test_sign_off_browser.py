"""The sign-off in real Chromium, as people do it: two mechanics sign a functional check with
their PINs, the supervisor returns it with a reason, they sign again, the supervisor certifies
and downloads the signed PDF record, and the record is checked for real."""

from __future__ import annotations

import io
import re
import struct
import subprocess
from pathlib import Path

import pypdf
import pytest
from playwright.sync_api import expect

from tests.conftest import DEMO_PASSWORDS, DEMO_PINS, LoggedIn
from tests.pdf_text import pdf_pages_text, pdf_text
from tests.web.jobs import functional_check_counted
from webapp import create_app, store
from webapp.records.signing import verify_record
from webapp.station.authority import station_authority
from webapp.store import jobs as job_store
from webapp.store import signers

from .conftest import log_in, tap

# Kept after the run (ignored by git): the downloaded record and its first page as a picture.
RESULTS = Path(__file__).resolve().parents[1] / "artifacts"  # with the other screenshots

# The one procedure whose sign steps end with a certifying signature (tasks/*.yaml): two
# performer signatures (selector, engine), then the supervisor's release to service.
PROCEDURE = "ignition-functional-check"
NAMES = {"mech1": "Aino Varga", "mech2": "Tomas Reyes",  # demo data, invented
         "super": "Priya Halvorsen"}                     # (demo_scenarios/bramblecoast.yaml)
REASON = "Signed before the fire guard confirmed the drains dry: confirm with them, then sign again"
WRONG_PIN = "000000"  # no demo person's PIN
TABLET = {"viewport": {"width": 1024, "height": 768}}

# PNG signature and first chunk: PNG specification (W3C Recommendation, ISO/IEC 15948),
# 5.2 "PNG signature" and 11.2.2 "IHDR Image header" (width, height: 4-byte big-endian).
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture
def check_job(live_server, db_path, station_clock):
    """A functional check on DEMO-101 engine 1, both channels, walked by mech1 through the
    station's real web app (its JSON API, the same database file and clock as the live
    server) up to its last two steps before the performer signs: ignition off, fuel check.
    mech2, at the engine, counts the snaps with both channels on (a performer signs only
    work they recorded)."""
    app = create_app({"DB_PATH": str(db_path), "SECRET_KEY": "pre-walk-secret",
                      "CLOCK": station_clock, "TESTING": True})
    db = store.connect(db_path)
    job = functional_check_counted(LoggedIn(app.test_client(), "mech1"),
                                   LoggedIn(app.test_client(), "mech2"), db, station_clock,
                                   until="ignition-off")
    yield job
    db.close()


def _tablet(browser, outside: list[str], base_url: str, context=None):
    context = context or browser.new_context(**TABLET)
    page = context.pages[0] if context.pages else context.new_page()
    page.on("request", lambda r: None if r.url.startswith(base_url) else outside.append(r.url))
    return context, page


def _mechanic_opens(page, base_url: str, username: str, job_id: int) -> None:
    log_in(page, base_url, username, DEMO_PASSWORDS[username])
    page.click(f"[data-testid=resume-job-{job_id}]")
    page.wait_for_url(f"{base_url}/jobs/{job_id}")


def _supervisor_logs_in(page, base_url: str) -> None:
    # conftest's log_in waits for /fleet; a supervisor's home is the review queue.
    page.goto(f"{base_url}/login")
    page.fill("#username", "super")
    page.fill("#password", DEMO_PASSWORDS["super"])
    page.click("[data-testid=login]")
    page.wait_for_url(f"{base_url}/review")


def _sign(page, step_id: str, pin: str) -> None:
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", step_id)
    page.fill("[data-testid=pin]", pin)
    tap(page, "[data-testid=sign]")


def _png_size(data: bytes) -> tuple[int, int]:
    assert data[:8] == PNG_SIGNATURE
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def test_sign_return_sign_again_certify_and_download_the_record(browser, live_server,
                                                                station_clock, check_job,
                                                                db_path):
    job_id = check_job.id
    outside: list[str] = []

    # mech1 finishes the job on the tablet and signs as the person at the selector.
    mech1_context, mech1 = _tablet(browser, outside, live_server)
    _mechanic_opens(mech1, live_server, "mech1", job_id)
    step = mech1.get_by_test_id("step")
    expect(step).to_have_attribute("data-step-id", "ignition-off")
    tap(mech1, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "check-fuel")
    tap(mech1, "[data-testid=done]")
    # The tool and foreign-object count before the cowls close: every item ticked.
    expect(step).to_have_attribute("data-step-id", "tool-count")
    for index in range(3):
        mech1.check(f"[data-testid=item-{index}]")
    tap(mech1, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "sign-selector")
    expect(mech1.get_by_test_id("sign-block")).to_contain_text(NAMES["mech1"])
    expect(mech1.get_by_test_id("sign-block")).to_contain_text("Meaning: Performed")
    expect(mech1.get_by_test_id("returned")).to_have_count(0)
    station_clock.advance(60)
    _sign(mech1, "sign-selector", DEMO_PINS["mech1"])
    expect(step).to_have_attribute("data-step-id", "sign-engine")
    expect(mech1.get_by_test_id("progress-sign-selector")).to_have_attribute("data-status",
                                                                             "done")
    expect(mech1.get_by_test_id("progress-sign-selector")).to_contain_text(NAMES["mech1"])

    # mech2, at the engine, signs on a second tablet.
    mech2_context, mech2 = _tablet(browser, outside, live_server)
    _mechanic_opens(mech2, live_server, "mech2", job_id)
    station_clock.advance(30)
    _sign(mech2, "sign-engine", DEMO_PINS["mech2"])
    expect(mech2.get_by_test_id("step")).to_have_attribute("data-step-id", "certify")

    # The supervisor finds the job in the review queue, reads the record, returns it.
    _, boss = _tablet(browser, outside, live_server,
                      browser.new_context(accept_downloads=True, **TABLET))
    _supervisor_logs_in(boss, live_server)
    boss.click(f"[data-testid=review-{job_id}]")
    boss.wait_for_url(f"{live_server}/review/{job_id}")
    preview = boss.get_by_test_id("record-preview")
    expect(preview).to_contain_text(NAMES["mech1"])
    expect(preview).to_contain_text(NAMES["mech2"])
    expect(boss.get_by_test_id("record-pdf")).to_contain_text("revision 1, 2 signature(s)")
    station_clock.advance(300)
    boss.fill("[data-testid=return-reason]", REASON)
    with boss.expect_navigation():
        boss.click("[data-testid=return]")
    expect(boss.get_by_test_id("refusal")).to_have_count(0)
    expect(boss.get_by_test_id("returns")).to_contain_text(REASON)
    expect(boss.get_by_test_id("not-waiting")).to_be_visible()
    expect(boss.get_by_test_id("certify-form")).to_have_count(0)
    boss.goto(f"{live_server}/review")
    expect(boss.get_by_test_id(f"review-{job_id}")).to_have_count(0)

    # mech1 sees the job back on the sign step with the supervisor's reason; the work stays.
    mech1.goto(f"{live_server}/fleet")
    mech1.click(f"[data-testid=resume-job-{job_id}]")
    expect(step).to_have_attribute("data-step-id", "sign-selector")
    expect(mech1.get_by_test_id("returned")).to_be_visible()
    expect(mech1.get_by_test_id("returned-reason")).to_have_text(REASON)
    expect(mech1.get_by_test_id("progress-check-fuel")).to_have_attribute("data-status", "done")
    expect(mech1.get_by_test_id("progress-sign-engine")).to_have_attribute("data-status",
                                                                           "waiting")
    RESULTS.mkdir(exist_ok=True)
    mech1.screenshot(path=str(RESULTS / "sign-off-returned-to-mechanic.png"), full_page=True)
    # What was asked (confirm with the fire guard) happens by the engine; then both sign again.
    station_clock.advance(600)
    _sign(mech1, "sign-selector", DEMO_PINS["mech1"])
    expect(step).to_have_attribute("data-step-id", "sign-engine")
    mech2.reload()
    expect(mech2.get_by_test_id("returned-reason")).to_have_text(REASON)
    station_clock.advance(30)
    _sign(mech2, "sign-engine", DEMO_PINS["mech2"])
    expect(mech2.get_by_test_id("step")).to_have_attribute("data-step-id", "certify")

    # The supervisor certifies with the PIN and downloads the record from the page.
    boss.goto(f"{live_server}/review")
    boss.click(f"[data-testid=review-{job_id}]")
    expect(boss.get_by_test_id("record-pdf")).to_contain_text("revision 2, 2 signature(s)")
    station_clock.advance(120)
    boss.fill("[data-testid=pin]", DEMO_PINS["super"])
    with boss.expect_navigation():
        boss.click("[data-testid=certify]")
    expect(boss.get_by_test_id("refusal")).to_have_count(0)
    expect(boss.get_by_test_id("certified")).to_be_visible()
    expect(boss.get_by_test_id("record-pdf")).to_contain_text("revision 2, 3 signature(s)")
    with boss.expect_download() as download_info:
        boss.get_by_test_id("record-pdf-download").click()
    download = download_info.value
    assert download.failure() is None
    assert download.suggested_filename == f"work-record-job-{job_id}-r2-s3.pdf"
    shown_id = boss.get_by_test_id("record-id").inner_text()   # what the page says it links
    pdf_path = RESULTS / "sign-off-record.pdf"
    download.save_as(pdf_path)
    pdf = pdf_path.read_bytes()
    for context in (mech1_context, mech2_context):
        context.close()
    assert outside == []

    # The file is the station's latest record: revision 2 (the return made a new one).
    db = store.connect(db_path)
    try:
        latest = signers.latest_record(db, job_id)
        history = [(r["revision"], r["signatures"]) for r in signers.records_of(db, job_id)]
        assert check_job.state()["status"] == "complete"
    finally:
        db.close()
    assert pdf.startswith(b"%PDF-") and pdf == latest["pdf"]
    assert (latest["revision"], latest["signatures"]) == (2, 3)
    assert history == [(1, 1), (1, 2), (2, 1), (2, 2), (2, 3)]

    # Every signature verifies against the station's CA, with its signer and meaning.
    authority = station_authority(db_path, "Test station", station_clock())
    reports = verify_record(pdf, authority.cert)
    assert [r.field_name for r in reports] == ["sign-selector", "sign-engine", "certify"]
    assert [r.signer for r in reports] == [NAMES["mech1"], NAMES["mech2"], NAMES["super"]]
    assert [r.meaning.split(" (")[0] for r in reports] == [
        "Performed", "Performed", "Certified for release to service"]
    for report in reports:
        assert report.intact and report.valid and report.trusted, report.summary
        assert not report.modified_after, report.summary
    text = "".join(page.extract_text() for page in pypdf.PdfReader(io.BytesIO(pdf)).pages)
    for name in NAMES.values():
        assert name in text
    # On paper too: each signature is stamped in its box (21 CFR 11.50).
    printed = pdf_text(pdf, RESULTS)
    # The record id on the review page is the one printed on every page of the PDF.
    assert re.fullmatch(r"SW-\d{5}-\d{3}-[0-9A-F]{8}", shown_id)
    pages = [p for p in pdf_pages_text(pdf, RESULTS) if p.strip()]
    assert all(f"Record {shown_id}" in page for page in pages)
    for name in NAMES.values():
        assert f"Signed electronically by {name}" in printed

    # Page 1 as a picture, kept with the run's results (Debian's poppler-utils).
    for stale in RESULTS.glob("sign-off-record-page-*.png"):
        stale.unlink()
    subprocess.run(["pdftoppm", "-png", "-r", "80", "-f", "1", "-l", "1", str(pdf_path),
                    str(RESULTS / "sign-off-record-page")], check=True, timeout=60)
    pictures = sorted(RESULTS.glob("sign-off-record-page-*.png"))
    assert len(pictures) == 1
    picture = pictures[0].read_bytes()
    width, height = _png_size(picture)
    assert width > 0 and height > 0
    assert len(picture) > 4096  # a rendered page of text, not an empty image


def test_a_wrong_pin_is_refused_on_screen_and_nothing_is_signed(browser, live_server,
                                                                check_job, db_path):
    check_job.walk_to("sign-selector")
    outside: list[str] = []
    context, page = _tablet(browser, outside, live_server)
    _mechanic_opens(page, live_server, "mech1", check_job.id)
    _sign(page, "sign-selector", WRONG_PIN)

    refusal = page.get_by_test_id("refusal")
    expect(refusal).to_be_visible()
    expect(refusal).to_contain_text("That PIN does not unlock your signing key")
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "sign-selector")
    expect(page.get_by_test_id("pin")).to_have_value("")  # the PIN is not shown back
    expect(page.get_by_test_id("progress-sign-selector")).to_have_attribute("data-status",
                                                                            "next")
    db = store.connect(db_path)
    try:
        assert signers.latest_record(db, check_job.id) is None
        assert "signed" not in [e["kind"] for e in job_store.events(db, check_job.id)]
        refused = job_store.refusals(db, check_job.id)
        assert [r["rule"] for r in refused] == ["wrong_pin"]
        assert WRONG_PIN not in str(refused)
    finally:
        db.close()
    assert check_job.state()["next_step"] == "sign-selector"

    # The right PIN then signs from the same screen.
    _sign(page, "sign-selector", DEMO_PINS["mech1"])
    expect(page.get_by_test_id("refusal")).to_have_count(0)
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "sign-engine")
    context.close()
    assert outside == []
