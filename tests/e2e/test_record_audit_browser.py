"""A records audit in real Chromium: the supervisor certifies a functional check, keeps the
certified file, finds a count transcribed wrongly and amends it from the review page (tied to
the step and field it corrects), then checks both files on the "Check a record" page: the kept
one is told apart as superseded, naming the revision and record that replace it; the new one
checks out as the latest."""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import expect

from tests.conftest import DEMO_PINS
from tests.web.jobs import _event, functional_check_counted
from webapp.store import signers

from .test_sign_off_browser import RESULTS, TABLET, _supervisor_logs_in

RECORD_ID = r"SW-\d{5}-\d{3}-[0-9A-F]{8}"
WHY = "Count transcribed from the wrong column of the worksheet"


@pytest.fixture
def signed_check(station_api, station_clock):
    """A functional check walked and signed by both mechanics through the station's API:
    waiting for the supervisor's certification."""
    mech1, mech2 = station_api("mech1"), station_api("mech2")
    job = functional_check_counted(mech1, mech2, station_api.db, station_clock)
    job.ok(_event("sign-selector", "signed", pin=DEMO_PINS["mech1"]))
    job.ok(_event("sign-engine", "signed", pin=DEMO_PINS["mech2"]), client=mech2)
    return job


def _check_file(page, base_url: str, path) -> str:
    page.goto(f"{base_url}/records/verify")
    page.set_input_files("[data-testid=record-file]", str(path))
    with page.expect_navigation():
        page.click("[data-testid=verify]")
    return page.get_by_test_id("verify-verdict").inner_text()


def test_certify_amend_and_tell_the_superseded_file_apart(browser, live_server, station_clock,
                                                          signed_check, station_api,
                                                          tmp_path):
    job_id = signed_check.id
    context = browser.new_context(accept_downloads=True, **TABLET)
    page = context.new_page()
    _supervisor_logs_in(page, live_server)
    page.goto(f"{live_server}/review/{job_id}")
    station_clock.advance(120)
    page.fill("[data-testid=pin]", DEMO_PINS["super"])
    with page.expect_navigation():
        page.click("[data-testid=certify]")
    expect(page.get_by_test_id("certified")).to_be_visible()
    certified_id = page.get_by_test_id("record-id").inner_text()
    assert re.fullmatch(RECORD_ID, certified_id)
    with page.expect_download() as download_info:
        page.get_by_test_id("record-pdf-download").click()
    certified_file = tmp_path / "certified.pdf"
    download_info.value.save_as(certified_file)

    # The amendment names a recorded field of a step; the list shows the value as recorded.
    options = page.locator("[data-testid=amend-target] option")
    labels = options.all_inner_texts()
    count_b = [label for label in labels if "(count-b), count:" in label]
    assert len(count_b) == 1 and count_b[0].endswith("count: 36"), labels  # as recorded
    page.select_option("[data-testid=amend-target]", "count-b::count")
    page.fill("[data-testid=amend-new]", "34")
    page.fill("#why", WHY)
    page.fill("#amend-pin", "000000")                   # a wrong PIN: refused, nothing kept
    with page.expect_navigation():
        page.click("[data-testid=amend]")
    expect(page.get_by_test_id("refusal")).to_be_visible()
    assert len(signers.records_of(station_api.db, job_id)) == 3
    page.select_option("[data-testid=amend-target]", "count-b::count")
    page.fill("[data-testid=amend-new]", "34")
    page.fill("#why", WHY)
    page.fill("#amend-pin", DEMO_PINS["super"])
    station_clock.advance(600)
    with page.expect_navigation():
        page.click("[data-testid=amend]")
    expect(page.get_by_test_id("refusal")).to_have_count(0)
    expect(page.get_by_test_id("record-pdf")).to_contain_text("revision 2, 1 signature(s)")
    page.screenshot(path=str(RESULTS / "review-after-amendment.png"), full_page=True)
    amended_id = page.get_by_test_id("record-id").inner_text()
    assert re.fullmatch(RECORD_ID, amended_id) and amended_id != certified_id
    with page.expect_download() as download_info:
        page.get_by_test_id("record-pdf-download").click()
    amended_file = tmp_path / "amended.pdf"
    download_info.value.save_as(amended_file)
    assert amended_file.read_bytes() == signers.latest_record(station_api.db, job_id)["pdf"]

    # The kept certified file: intact, but never the plain "checks out".
    verdict = _check_file(page, live_server, certified_file)
    assert "checks out" not in verdict
    assert f"The record {certified_id} is intact but not the latest" in verdict
    assert f"superseded by revision 2 (record {amended_id}" in verdict
    assert f"reason: amended: {WHY}" in verdict, verdict         # the reason is named
    page.screenshot(path=str(RESULTS / "check-a-superseded-record.png"), full_page=True)
    signature_rows = page.locator("[data-testid=verify-result] tbody tr")
    expect(signature_rows).to_have_count(3)
    # The amended file: the latest state of the latest revision.
    verdict = _check_file(page, live_server, amended_file)
    assert f"The record {amended_id} checks out" in verdict and "revision 2" in verdict
    expect(page.locator("[data-testid=verify-result] tbody tr")).to_have_count(1)
    # Not a PDF: a clear refusal on the page, not a crash.
    junk = tmp_path / "junk.pdf"
    junk.write_bytes(b"not a pdf at all")
    verdict = _check_file(page, live_server, junk)
    assert "does not check out" in verdict
    context.close()
