"""Spark count verdicts in real Chromium: a combined count at one unit's rate is out of
limits and asks for a finding; a "replaced" finding asks for the re-test count."""

from __future__ import annotations

from playwright.sync_api import expect

from tests.conftest import DEMO_PASSWORDS
from tests.web.jobs import Job

from .conftest import log_in, tap
from .test_tablet_grade import _audit


def test_a_combined_count_at_one_unit_s_rate_needs_a_finding_and_a_re_test(
        browser, live_server, station_api, station_clock):
    # A functional check on DEMO-101 engine 1 walked to its combined count: A and B each
    # counted 36 in 30 s (72/min, the demo walk's counts, invented).
    check = Job(station_api("mech1"), station_api.db, station_clock,
                "ignition-functional-check", channel=None)
    check.walk_to("count-both")
    context = browser.new_context(viewport={"width": 1024, "height": 768}, has_touch=True)
    page = context.new_page()
    page.clock.install()   # the tablet's own clock moves with the station's below
    log_in(page, live_server, "mech1", DEMO_PASSWORDS["mech1"])
    page.goto(f"{live_server}/jobs/{check.id}")
    step = page.get_by_test_id("step")
    expect(step).to_have_attribute("data-step-id", "count-both")
    tap(page, "[data-testid=start-count]")
    station_clock.advance(30)                      # the 30 s window, on the station's clock
    page.clock.fast_forward(30_000)                # and on the tablet's
    page.fill("[data-testid=count]", "36")         # heard as one unit: 72/min with both on
    page.fill("[data-testid=supply-voltage-timed]", "27.5")   # 22-29 V DC (from memory)
    tap(page, "[data-testid=use-count]")
    expect(page.get_by_test_id("finding-needed")).to_be_visible()
    attempts = page.get_by_test_id("attempts")
    expect(attempts).to_contain_text("out of limits")
    expect(attempts).to_contain_text("one unit not firing")
    _audit(page, "a combined count out of limits, finding asked for")

    page.fill("[data-testid=finding-text]", "Channel B exciter silent with both selected")
    page.check("[data-testid=disposition-replaced]")
    tap(page, "[data-testid=record-finding]")
    # Replaced: the step is not done; it asks for the re-test count.
    expect(step).to_have_attribute("data-step-id", "count-both")
    expect(page.get_by_test_id("count-not-started")).to_be_visible()
    expect(page.get_by_test_id("progress-count-both")).not_to_have_attribute("data-status",
                                                                             "done")
    tap(page, "[data-testid=start-count]")
    station_clock.advance(30)
    page.clock.fast_forward(30_000)
    page.fill("[data-testid=count]", "72")          # 144/min: A + B
    page.fill("[data-testid=supply-voltage-timed]", "27.5")
    tap(page, "[data-testid=use-count]")
    expect(step).not_to_have_attribute("data-step-id", "count-both")
    expect(page.get_by_test_id("progress-count-both")).to_have_attribute("data-status", "done")
    context.close()
