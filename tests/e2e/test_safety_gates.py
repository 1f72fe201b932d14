"""The exciter removal's gates in real Chromium: tags, then a discharge wait that cannot be cut."""

from __future__ import annotations

import uuid
from datetime import UTC, datetime, timedelta
from pathlib import Path

from playwright.sync_api import expect

from .conftest import log_in, open_removal_to_warning, tap

ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts"


def _walk_to_discharge_wait(page, live_server):
    open_removal_to_warning(page, live_server)
    step = page.get_by_test_id("step")
    tap(page, "[data-testid=acknowledge]")
    expect(step).to_have_attribute("data-step-kind", "lockout")
    # Confirming before every breaker is tagged is refused on screen.
    tap(page, "[data-testid=done]")
    expect(page.get_by_test_id("refusal")).to_contain_text("Tag every breaker of this step")
    for breaker, tag in (("IGN-A", "T-4471"), ("IGN-B", "T-4472")):
        page.fill(f"[data-testid=tag-number-{breaker}]", tag)
        tap(page, f"[data-testid=tag-{breaker}]")
        expect(page.get_by_test_id(f"tagged-{breaker}")).to_contain_text(tag)
    expect(page.get_by_test_id("engine-tag-T-4471")).to_contain_text("Aino Varga")
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=continue]")            # NOTE: input first
    tap(page, "[data-testid=done]")                # input disconnected: the clock starts
    expect(step).to_have_attribute("data-step-kind", "discharge_wait")
    return step


def test_discharge_wait_counts_down_and_cannot_be_cut_short(browser, live_server,
                                                             station_clock):
    context = browser.new_context(viewport={"width": 1024, "height": 768})
    page = context.new_page()
    # The page's clock stands still unless the test moves it (Playwright's clock API).
    start = datetime.now(UTC)
    page.clock.install(time=start)
    page.clock.pause_at(start + timedelta(seconds=1))
    step = _walk_to_discharge_wait(page, live_server)

    # The data's 2 min governs (the 4 uF / 2.2 MOhm bleed-down to 50 V is about 34 s).
    expect(page.get_by_test_id("countdown")).to_have_text("2:00")
    expect(page.get_by_test_id("estimate")).to_contain_text("2500 V")
    expect(page.get_by_test_id("estimate")).to_contain_text("12.50 J")
    done = page.get_by_test_id("done")
    expect(done).to_be_disabled()
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "discharge-wait.png"), full_page=True)

    page.clock.fast_forward("00:30")
    expect(page.get_by_test_id("countdown")).to_have_text("1:30")
    # V(30 s) = 2500 * exp(-30 / 8.8) = 2500 * 0.03307 = 82.7 V: the estimate follows it.
    expect(page.get_by_test_id("estimate")).to_contain_text("83 V")
    expect(done).to_be_disabled()

    # A forced request (the button bypassed) is refused by the station with its rule.
    station_clock.advance(30)
    token = page.locator("meta[name=csrf-token]").get_attribute("content")
    job_id = page.get_by_test_id("job").get_attribute("data-job-id")
    forced = page.request.post(f"{live_server}/api/jobs/{job_id}/events",
                               headers={"X-CSRFToken": token},
                               data={"id": str(uuid.uuid4()), "kind": "step_done",
                                     "step": "discharge"})
    assert forced.status == 409
    assert forced.json()["rule"] == "discharge_wait"
    assert forced.json()["seconds_remaining"] == 90

    # Both clocks move on past the wait: the control enables and the station accepts it.
    station_clock.advance(91)
    page.clock.fast_forward("01:31")
    expect(done).to_be_enabled()
    done.click()
    # 29 CFR 1910.147(d)(6): the isolation is verified before the work starts.
    expect(step).to_have_attribute("data-step-id", "verify-isolation")
    context.close()


def test_isolation_check_then_grounding_again_after_a_pause(browser, live_server,
                                                           station_clock):
    context = browser.new_context(viewport={"width": 1024, "height": 768})
    page = context.new_page()
    start = datetime.now(UTC)
    page.clock.install(time=start)
    page.clock.pause_at(start + timedelta(seconds=1))
    step = _walk_to_discharge_wait(page, live_server)
    station_clock.advance(121)
    page.clock.fast_forward("02:01")
    tap(page, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "verify-isolation")

    # Voltage present (a breaker not isolating the 28 V bus, demo): out of limits, a finding
    # is needed and the finding offers no deferral.
    page.fill("[data-testid=reading-value]", "27.6")
    page.select_option("[data-testid=instrument-pick]", "VM-004")   # demo voltmeter
    tap(page, "[data-testid=record-reading]")
    expect(page.get_by_test_id("finding-needed")).to_be_visible()
    expect(page.get_by_test_id("disposition-deferred")).to_have_count(0)
    page.fill("[data-testid=finding-text]", "27.6 V at pin A: channel A breaker not the "
              "one tagged; the right one opened and tagged (demo)")
    page.check("[data-testid=disposition-repaired]")
    tap(page, "[data-testid=record-finding]")
    expect(page.get_by_test_id("finding-needed")).to_have_count(0)
    expect(step).to_have_attribute("data-step-id", "verify-isolation")
    page.fill("[data-testid=reading-value]", "0.02")
    page.select_option("[data-testid=instrument-pick]", "VM-004")   # demo voltmeter
    tap(page, "[data-testid=record-reading]")
    expect(step).to_have_attribute("data-step-id", "disconnect-leads")
    tap(page, "[data-testid=done]")
    for _ in range(2):                            # WARNING ground, CAUTION cap
        tap(page, "[data-testid=acknowledge]")
    expect(step).to_have_attribute("data-step-id", "ground-terminals")
    tap(page, "[data-testid=done]")
    expect(page.get_by_test_id("grounded-at")).to_contain_text("Lead last grounded")
    tap(page, "[data-testid=acknowledge]")        # WARNING sealed unit
    expect(step).to_have_attribute("data-step-id", "remove-unit")

    # A pause longer than the window: the screen asks for grounding again, the station
    # refuses the handling step until it is recorded.
    station_clock.advance(16 * 60)   # past the 15 min window (common practice, no source)
    page.reload()
    expect(page.get_by_test_id("grounding-due")).to_contain_text("Ground the lead again")
    tap(page, "[data-testid=done]")
    expect(page.get_by_test_id("refusal")).to_contain_text("last grounded")
    expect(step).to_have_attribute("data-step-id", "remove-unit")
    tap(page, "[data-testid=lead-grounded]")
    expect(page.get_by_test_id("grounding-due")).to_have_count(0)
    expect(page.get_by_test_id("grounded-at")).to_contain_text("0:00 ago")
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "grounding-again.png"), full_page=True)
    tap(page, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "removed-exciter")
    context.close()


def test_functional_check_handover_release_and_duty_cycle(browser, live_server, station_clock):
    # mech1 locks the engine out in a removal job (left open).
    first = browser.new_context(viewport={"width": 1024, "height": 768})
    owner = first.new_page()
    open_removal_to_warning(owner, live_server)
    tap(owner, "[data-testid=acknowledge]")
    for breaker, tag in (("IGN-A", "T-4471"), ("IGN-B", "T-4472")):
        owner.fill(f"[data-testid=tag-number-{breaker}]", tag)
        tap(owner, f"[data-testid=tag-{breaker}]")
    tap(owner, "[data-testid=done]")

    # mech2 does the functional check: up to the release of the tags.
    context = browser.new_context(viewport={"width": 1024, "height": 768})
    page = context.new_page()
    start = datetime.now(UTC)
    page.clock.install(time=start)
    page.clock.pause_at(start + timedelta(seconds=1))
    log_in(page, live_server, "mech2", "demo-mech2")
    page.click("[data-testid=engine-QT6-10231]")
    expect(page.get_by_test_id("engine-tag-T-4471")).to_contain_text("Aino Varga")
    page.click("[data-testid=open-ignition-functional-check-all]")
    step = page.get_by_test_id("step")
    tap(page, "[data-testid=done]")
    for index in range(3):
        page.check(f"[data-testid=item-{index}]")
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=acknowledge]")
    expect(step).to_have_attribute("data-step-id", "release-tags")
    expect(page.get_by_test_id("owned-T-4471")).to_contain_text("Aino Varga")
    # Nothing to take over until the owner consents.
    expect(page.get_by_test_id("no-consent-T-4471")).to_be_visible()
    expect(page.get_by_test_id("take-over-T-4471")).to_have_count(0)
    job_url = page.url

    # mech1, on their own log-in, hands T-4471 to mech2 with their PIN, then goes home.
    owner.goto(job_url)
    owner.get_by_test_id("hand-over-open-T-4471").click()
    owner.select_option("[data-testid=hand-to-T-4471]", label="Tomas Reyes")
    owner.fill("[data-testid=hand-pin-T-4471]", "135790")   # demo PIN, invented
    ARTIFACTS.mkdir(exist_ok=True)
    owner.screenshot(path=str(ARTIFACTS / "tag-hand-over.png"), full_page=True)
    tap(owner, "[data-testid=hand-over-T-4471]")
    expect(owner.get_by_test_id("consent-T-4471")).to_contain_text("Handed to Tomas Reyes")
    first.close()

    # Ten minutes later mech2 checks the breaker, takes T-4471 over and removes it.
    station_clock.advance(600)
    page.reload()
    page.check("[data-testid=confirm-open-T-4471]")
    tap(page, "[data-testid=take-over-T-4471]")
    expect(page.get_by_test_id("tag-owner-T-4471")).to_contain_text("Tomas Reyes, owner since")
    tap(page, "[data-testid=remove-T-4471]")

    # T-4472's owner has left: the supervisor authorises its removal on their own log-in.
    desk = browser.new_context(viewport={"width": 1024, "height": 768})
    supervisor = desk.new_page()
    supervisor.goto(job_url)
    supervisor.fill("#username", "super")
    supervisor.fill("#password", "demo-super")
    supervisor.click("[data-testid=login]")
    supervisor.wait_for_url(job_url)
    supervisor.get_by_test_id("authorise-removal-open-T-4472").click()
    supervisor.fill("[data-testid=removal-reason-T-4472]",
                    "Aino Varga left site at 17:30; phoned twice; breaker checked in person")
    supervisor.fill("[data-testid=removal-pin-T-4472]", "802468")   # demo PIN, invented
    supervisor.screenshot(path=str(ARTIFACTS / "tag-absent-owner.png"), full_page=True)
    tap(supervisor, "[data-testid=authorise-removal-T-4472]")
    expect(supervisor.get_by_test_id("removal-authorised-T-4472")).to_contain_text(
        "Priya Halvorsen")
    desk.close()

    page.reload()
    expect(page.get_by_test_id("removal-authorised-T-4472")).to_contain_text("phoned twice")
    tap(page, "[data-testid=absent-T-4472]")
    tap(page, "[data-testid=done]")
    for _ in range(3):
        tap(page, "[data-testid=acknowledge]")
    for index in range(8):
        page.check(f"[data-testid=item-{index}]")
    tap(page, "[data-testid=done]")
    tap(page, "[data-testid=acknowledge]")          # CAUTION: duty cycle
    expect(step).to_have_attribute("data-step-kind", "ignition_run")
    tap(page, "[data-testid=energise]")
    live = page.get_by_test_id("live-channel-A")
    expect(live).to_contain_text("Channel A ON")
    expect(page.get_by_test_id("limit-near")).to_be_hidden()
    station_clock.advance(100)
    page.clock.fast_forward("01:40")
    expect(page.get_by_test_id("limit-near")).to_be_visible()
    expect(live).to_contain_text("1:40")
    page.screenshot(path=str(ARTIFACTS / "ignition-run-limit-near.png"), full_page=True)
    tap(page, "[data-testid=de-energise-A]")
    expect(page.get_by_test_id("live-channel-A")).to_have_count(0)
    context.close()
