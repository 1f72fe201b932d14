"""The engine as the station's truth, in real Chromium: an exciter comes off, a second job's
ignition run is refused naming the open job, a new exciter goes on with its release
certificate, a functional check releases the engine, and the engine page, the fleet list
and the record all show the new serial with the removed unit listed as removed.

Long stretches of routine steps are walked through the station's own web app over the same
database file and clock (`station_api`); the steps this test is about are done on screen.
"""

from __future__ import annotations

import io
from pathlib import Path

import pypdf
from playwright.sync_api import expect

from tests.conftest import DEMO_PASSWORDS, DEMO_PINS
from tests.web.jobs import DEMO_101_ENGINE_1, Job, _event
from webapp.store import engines

from .conftest import fill_part, log_in, tap
from .test_tablet_grade import _audit

ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts"
NEW_SERIAL = "XE-9001"            # invented
RELEASE = "DEMO-REL-2026-0099"    # invented release certificate reference
TABLET = {"viewport": {"width": 1024, "height": 768}}


def _sign(job, step_id, username, station_api):
    job.ok(_event(step_id, "signed", pin=DEMO_PINS[username]), client=station_api(username))


def test_remove_refuse_install_release_and_every_page_agrees(browser, live_server, station_api,
                                                             station_clock):
    db = station_api.db
    mech1, mech2 = station_api("mech1"), station_api("mech2")
    removed = engines.current(db, DEMO_101_ENGINE_1).fitted("exciter", "A")
    context = browser.new_context(**TABLET)
    page = context.new_page()
    outside: list[str] = []
    page.on("request", lambda r: None if r.url.startswith(live_server) else outside.append(r.url))
    log_in(page, live_server, "mech1", DEMO_PASSWORDS["mech1"])

    # 1. The channel A exciter comes off: the mechanic records the data plate on screen.
    removal = Job(mech1, db, station_clock, "exciter-removal", channel="A")
    removal.walk_to("removed-exciter")
    page.goto(f"{live_server}/jobs/{removal.id}")
    step = page.get_by_test_id("step")
    expect(step).to_have_attribute("data-step-id", "removed-exciter")
    expect(page.get_by_test_id("fitted-serial")).to_have_text(removed.serial)
    _audit(page, "part removal step")
    fill_part(page, removed.part_number, removed.serial, removed=True, tag_or_release="U-0042")
    expect(step).to_have_attribute("data-step-id", "tool-count")   # the close-up count
    page.goto(f"{live_server}/fleet/engines/{DEMO_101_ENGINE_1}")
    expect(page.get_by_test_id("position-exciter-A")).to_contain_text("Empty")
    expect(page.get_by_test_id("position-exciter-A")).to_contain_text(
        f"removed in job {removal.id}")
    expect(page.get_by_test_id("not-whole-A")).to_be_visible()

    # 2. A second job on the same engine tries to run channel A: refused, naming the job.
    check = Job(mech1, db, station_clock, "ignition-functional-check", channel=None)
    check.walk_to("release-tags")
    for tag in ("T-1", "T-2"):   # the removal's own tags, taken off by their owner
        check.ok(_event("release-tags", "tag_removed", tag=tag))
    check.ok(_event("release-tags"))
    check.walk_to("run-a-dc")
    page.goto(f"{live_server}/jobs/{check.id}")
    expect(step).to_have_attribute("data-step-id", "run-a-dc")
    expect(page.get_by_test_id("channel-not-whole-A")).to_contain_text(f"job {removal.id}")
    tap(page, "[data-testid=energise]")
    refusal = page.get_by_test_id("refusal")
    expect(refusal).to_contain_text("not whole")
    expect(refusal).to_contain_text(f"removed in job {removal.id}")
    expect(step).to_have_attribute("data-step-id", "run-a-dc")
    page.screenshot(path=str(ARTIFACTS / "energise-refused-channel-not-whole.png"),
                    full_page=True)
    removal.walk_to("performer")  # the removal's signatures are for another day

    # 3. The new exciter goes on, with its release certificate, on screen.
    install = Job(mech1, db, station_clock, "exciter-installation", channel="A")
    install.walk_to("incoming-exciter")
    page.goto(f"{live_server}/jobs/{install.id}")
    expect(step).to_have_attribute("data-step-id", "incoming-exciter")
    expect(page.get_by_test_id("allowed-parts")).to_contain_text("XEX-1001-04 (alternate)")
    fill_part(page, "XEX-3100-02", NEW_SERIAL, removed=False, tag_or_release=RELEASE)
    expect(page.get_by_test_id("refusal")).to_contain_text("not a part number")
    fill_part(page, "XEX-1001-04", NEW_SERIAL, removed=False, tag_or_release=RELEASE)
    expect(step).not_to_have_attribute("data-step-id", "incoming-exciter")
    install.walk_to("performer")
    _sign(install, "performer", "mech1", station_api)
    _sign(install, "inspector", "mech2", station_api)
    _sign(install, "certify", "super", station_api)
    assert install.state()["status"] == "complete"

    # 4. The functional check after it: mech2 counts at the engine, both sign.
    final = Job(mech1, db, station_clock, "ignition-functional-check", channel=None)
    final.walk_to("release-tags")
    for tag in ("T-1", "T-2"):   # the installation's tags
        final.ok(_event("release-tags", "tag_removed", tag=tag))
    final.ok(_event("release-tags"))
    final.walk_to("count-a")
    for count_step, count in (("count-a", 36), ("count-b", 36), ("count-both", 70)):
        final.count(count_step, method="timed", count=count, window_s=30,
                    client=mech2)   # demo counts, as the demo walk's
        final.walk_to({"count-a": "count-b", "count-b": "count-both",
                       "count-both": "sign-selector"}[count_step])
    _sign(final, "sign-selector", "mech1", station_api)
    _sign(final, "sign-engine", "mech2", station_api)

    # 5. The supervisor sees what certifying states, certifies, and the engine is released.
    boss_context = browser.new_context(**TABLET)
    boss = boss_context.new_page()
    boss.goto(f"{live_server}/login")
    boss.fill("#username", "super")
    boss.fill("#password", DEMO_PASSWORDS["super"])
    boss.click("[data-testid=login]")
    boss.wait_for_url(f"{live_server}/review")
    expect(boss.get_by_test_id(f"queue-release-{final.id}")).to_contain_text(
        "Released to service")
    boss.click(f"[data-testid=review-{final.id}]")
    expect(boss.get_by_test_id("release-preview")).to_contain_text(
        "Certifying now states: Released to service")
    boss.fill("[data-testid=pin]", DEMO_PINS["super"])
    with boss.expect_navigation():
        boss.click("[data-testid=certify]")
    expect(boss.get_by_test_id("certified")).to_contain_text("Released to service")
    boss.goto(f"{live_server}/jobs")
    expect(boss.get_by_test_id(f"progress-of-{final.id}")).to_have_text("Released")
    expect(boss.get_by_test_id(f"progress-of-{install.id}")).to_have_text(
        "Closed, not released")
    boss_context.close()

    # 6. The engine page, the fleet list and the record agree on what is fitted.
    page.goto(f"{live_server}/fleet/engines/{DEMO_101_ENGINE_1}")
    expect(page.get_by_test_id("position-exciter-A")).to_contain_text(NEW_SERIAL)
    expect(page.get_by_test_id("position-exciter-A")).to_contain_text(
        f"fitted in job {install.id}")
    expect(page.get_by_test_id(f"removed-{removed.serial}")).to_contain_text("unserviceable")
    expect(page.get_by_test_id("not-whole-A")).to_have_count(0)
    expect(page.get_by_test_id("open-items")).to_have_count(0)   # no check due any more
    page.screenshot(path=str(ARTIFACTS / "engine-page-after-exciter-change.png"),
                    full_page=True)
    _audit(page, "engine page with a removed part")
    page.get_by_test_id(f"removed-{removed.serial}").get_by_role("link").click()
    expect(page.get_by_test_id("part-where")).to_contain_text("last removed unserviceable")
    expect(page.get_by_test_id("move-1")).to_contain_text(f"job {removal.id}")
    _audit(page, "a part's history")
    page.goto(f"{live_server}/fleet")
    fitted = page.get_by_test_id("fitted-exciters-QT6-10231")
    expect(fitted).to_contain_text(f"A {NEW_SERIAL}")
    expect(fitted).not_to_contain_text(removed.serial)
    page.goto(f"{live_server}/fleet/wear")
    expect(page.get_by_test_id(f"exciter-{NEW_SERIAL}")).to_be_visible()
    expect(page.get_by_test_id(f"exciter-{removed.serial}")).to_have_count(0)
    answer = page.request.get(f"{live_server}/jobs/{install.id}/record.pdf")
    assert answer.ok
    text = " ".join(" ".join(p.extract_text() for p in pypdf.PdfReader(
        io.BytesIO(answer.body())).pages).split())
    assert f"FITTED on channel A: P/N XEX-1001-04 (alternate), S/N {NEW_SERIAL}" in text
    assert f"release certificate {RELEASE}" in text
    context.close()
    assert outside == []
