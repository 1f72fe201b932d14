"""The admin's register of calibrated instruments in real Chromium: the overdue wrench marked,
a bad entry answered at its field, a calibration recorded. Demo register data is invented."""

from __future__ import annotations

import pytest
from playwright.sync_api import expect

from .conftest import tap
from .test_tablet_grade import _audit


@pytest.mark.parametrize("viewport", [{"width": 360, "height": 740},
                                      {"width": 1024, "height": 768}], ids=["phone", "tablet"])
def test_the_admin_keeps_the_register(browser, live_server, viewport):
    context = browser.new_context(viewport=viewport, has_touch=True)
    page = context.new_page()
    page.goto(f"{live_server}/login")
    page.fill("#username", "admin")
    page.fill("#password", "demo-admin")
    page.click("[data-testid=login]")
    expect(page).not_to_have_url(f"{live_server}/login")
    page.goto(f"{live_server}/instruments")
    overdue = page.get_by_test_id("status-TW-009")
    expect(overdue).to_contain_text("overdue for calibration")
    expect(page.get_by_test_id("status-AM-002")).to_contain_text("quarantined")
    expect(page.get_by_test_id("status-TW-017")).to_contain_text("in service, in calibration")
    _audit(page, "instruments")

    # A range in volts for a torque wrench is answered at its field; nothing registered.
    page.fill("[data-testid=input-instrument_id]", "TW-500")
    page.select_option("[data-testid=input-kind]", "torque wrench")
    page.fill("[data-testid=input-range_low]", "5")
    page.fill("[data-testid=input-range_high]", "25")
    page.fill("[data-testid=input-range_unit]", "V")
    page.fill("[data-testid=input-calibration_due]", "2099-01-31")
    tap(page, "[data-testid=add]")
    expect(page.get_by_test_id("field-error-range_unit")).to_contain_text("torque is needed")
    expect(page.get_by_test_id("input-instrument_id")).to_have_value("TW-500")
    expect(page.get_by_test_id("instrument-TW-500")).to_have_count(0)
    page.fill("[data-testid=input-range_unit]", "N*m")
    tap(page, "[data-testid=add]")
    expect(page.get_by_test_id("status-TW-500")).to_contain_text("in service, in calibration")

    # The overdue wrench calibrated: in calibration again, the change in its history.
    page.fill("[data-testid=due-TW-009]", "2099-06-30")
    tap(page, "[data-testid=calibrated-TW-009]")
    expect(page.get_by_test_id("status-TW-009")).to_contain_text("in service, in calibration")
    expect(page.get_by_test_id("history-TW-009")).to_contain_text(
        "calibrated, due 2099-06-30 by Dana Whitcombe")
    context.close()
