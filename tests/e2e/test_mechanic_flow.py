"""A mechanic works a procedure on a tablet in real Chromium, leaves, and resumes it."""

from __future__ import annotations

from pathlib import Path

import pytest
from playwright.sync_api import expect

from webapp.domain.procedure_files import parse_procedure

from .conftest import log_in, tap

ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts"
TASKS = Path(__file__).resolve().parents[2] / "tasks"
# The removal's steps on DEMO-101 engine 1 (DC exciters, surface-discharge plugs; demo data).
REMOVAL_STEPS = len(parse_procedure((TASKS / "exciter-removal.yaml").read_text(
    encoding="utf-8")).steps_for(["dc"], ["surface-discharge"]))


@pytest.mark.parametrize("device", ["iPad Mini", "Galaxy S8"])
def test_walk_steps_reload_and_resume_on_another_device(browser, playwright, live_server,
                                                        device):
    tablet = playwright.devices[device]
    context = browser.new_context(**tablet)
    page = context.new_page()
    outside = []
    page.on("request", lambda r: None if r.url.startswith(live_server) else outside.append(r.url))
    log_in(page, live_server, "mech1", "demo-mech1")

    page.click("[data-testid=engine-QT6-10231]")
    expect(page.get_by_test_id("context")).to_contain_text("DEMO-101")
    page.click("[data-testid=open-exciter-removal-A]")
    step = page.get_by_test_id("step")
    expect(step).to_have_attribute("data-step-id", "identify")
    expect(page.get_by_test_id("source")).to_contain_text("QT-610 Engine Maintenance Manual")
    expect(page.get_by_test_id("safety-notice")).to_contain_text("approved maintenance data")

    job_url = page.url
    assert page.evaluate("window.htmx.version") == "2.0.11"
    tap(page, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "selectors-off")
    assert page.url == job_url  # htmx swapped the step in place
    # The Done button does nothing until every item is ticked (the station would refuse too).
    tap(page, "[data-testid=done]")
    expect(step).to_have_attribute("data-step-id", "selectors-off")
    for index in range(3):
        page.check(f"[data-testid=item-{index}]")
    tap(page, "[data-testid=done]")

    expect(step).to_have_attribute("data-step-kind", "warning")
    expect(step).to_contain_text("WARNING")
    tap(page, "[data-testid=acknowledge]")
    expect(step).to_have_attribute("data-step-id", "breakers")
    expect(page.get_by_test_id("reminders")).to_contain_text("lethal charge")
    expect(page.get_by_test_id("tag-number-IGN-A")).to_be_visible()
    expect(page.get_by_test_id("progress")).to_have_text(
        f"3 of {REMOVAL_STEPS} steps done")

    ARTIFACTS.mkdir(exist_ok=True)
    shot = f"step-screen-{device.lower().replace(' ', '-')}.png"
    page.screenshot(path=str(ARTIFACTS / shot), full_page=True)

    page.reload()
    expect(page.get_by_test_id("step")).to_have_attribute("data-step-id", "breakers")
    expect(page.get_by_test_id("progress-identify")).to_have_attribute("data-status", "done")
    context.close()

    # Another tablet, another mechanic: the job is where it was left.
    other = browser.new_context(**tablet)
    second = other.new_page()
    log_in(second, live_server, "mech2", "demo-mech2")
    second.click("[data-testid^=resume-job-]")
    assert second.url == job_url
    expect(second.get_by_test_id("step")).to_have_attribute("data-step-id", "breakers")
    expect(second.get_by_test_id("progress-identify")).to_contain_text("Aino Varga")
    other.close()
    assert outside == []
