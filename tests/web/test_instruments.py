"""The register of calibrated instruments through the station: the admin page, the step screen's
choice, and the JSON API refusing an instrument it cannot trust (nothing stored).

The demo register (demo_scenarios/bramblecoast.yaml) is invented: TW-017 and TW-031 torque
wrenches in calibration, TW-009 overdue since 2026-11-15, AM-002 quarantined. The tests'
station clock stands at 2026-12-01 (ManualClock). Due today is still in, due yesterday is out:
common practice, no source.
"""

from __future__ import annotations

import re

import pytest

from tests.web.jobs import Job, _event, exciter_removed
from webapp.station import instruments as keeping
from webapp.store import instruments as register
from webapp.store import jobs as job_store


@pytest.fixture
def installation(mechanic, db, clock):
    exciter_removed(mechanic, db, clock)
    job = Job(mechanic, db, clock, "exciter-installation")
    job.walk_to("mounting-torque")
    return job


def _torque(instrument_id, value="37", unit="lbf*in"):
    # Bolt 1 of the demo bracket, limits 35–40 lbf·in (tasks/ demo data, invented).
    return _event("mounting-torque", "reading_recorded", value=value, unit=unit,
                  fastener="Bolt 1, upper forward", instrument_id=instrument_id)


def _stored(job):
    return len(job_store.events(job.db, job.id))


@pytest.mark.parametrize(("instrument_id", "rule", "said"), [
    ("TW-404", "instrument_unknown", "not in the station's register"),
    ("VM-004", "instrument_wrong_kind", "VM-004 is a voltmeter"),
    ("TW-009", "instrument_out_of_calibration", "2026-11-15"),
    ("TW-031", "instrument_out_of_range", "100–600 lbf*in"),   # 37 lbf·in is under its range
])
def test_an_instrument_the_station_cannot_trust_is_refused_and_nothing_stored(
        installation, instrument_id, rule, said):
    before = _stored(installation)
    refused = installation.refused(_torque(instrument_id), rule)
    assert said in refused["reason"]
    assert _stored(installation) == before


def test_a_quarantined_instrument_is_refused(installation, db, clock):
    keeping.take_out(db, instrument_id="TW-017", status="quarantined", by=None, now=clock())
    refused = installation.refused(_torque("TW-017"), "instrument_not_in_service")
    assert "quarantined" in refused["reason"]


def test_the_wrench_setting_is_judged_against_the_wrench_range_in_its_unit(installation):
    # NIST SP 811 B.9: 1 lbf·in = 0.1129848 N·m, so 100 lbf·in (TW-017's top) = 11.29848 N·m.
    # 11.30 N·m = 100.013 lbf·in: beyond the wrench's range (and the step's limits too).
    installation.refused(_torque("TW-017", "11.30", "N*m"), "instrument_out_of_range")
    # 4.2 N·m = 37.17 lbf·in: inside both.
    installation.ok(_torque("TW-017", "4.2", "N*m"))


def test_due_today_is_in_and_due_yesterday_is_out(installation, db, clock):
    today = clock().date()   # 2026-12-01
    keeping.add(db, instrument_id="TW-100", kind="torque wrench", range_low=20,
                range_high=100, range_unit="lbf*in", calibration_due="2026-11-30", by=None,
                now=clock())
    keeping.add(db, instrument_id="TW-101", kind="torque wrench", range_low=20,
                range_high=100, range_unit="lbf*in", calibration_due=today, by=None,
                now=clock())
    installation.refused(_torque("TW-100"), "instrument_out_of_calibration")
    installation.ok(_torque("TW-101"))
    reading = installation.state()["readings"][-1]
    assert reading["instrument"]["id"] == "TW-101"
    assert reading["instrument"]["calibration_due"] == "2026-12-01"


def test_an_id_typed_in_another_case_finds_the_register_entry(installation):
    installation.ok(_torque("tw-017"))
    assert installation.state()["readings"][-1]["instrument"]["id"] == "TW-017"


# --- the step screen -------------------------------------------------------------------------

def _event_id(html):
    return re.search(r'name="event_id" value="([^"]+)"', html).group(1)


def test_the_torque_screen_offers_only_usable_wrenches_with_their_due_dates(installation,
                                                                          mechanic):
    page = mechanic.get(f"/jobs/{installation.id}").get_data(as_text=True)
    pick = re.search(r'<select[^>]*name="instrument_pick".*?</select>', page, re.S).group(0)
    assert "TW-017" in pick and "calibration due 2027-06-30" in pick
    assert "TW-031" in pick
    assert "TW-009" not in pick           # overdue: not offered
    assert "VM-004" not in pick           # another kind
    assert 'name="instrument_id"' in page  # a scanner types here
    assert 'name="wrench_id"' not in page and 'name="calibration_due"' not in page


def test_a_wrench_chosen_on_the_screen_is_recorded_and_a_typed_overdue_one_refused(
        installation, mechanic):
    url = f"/jobs/{installation.id}/steps/mounting-torque"
    form = {"kind": "reading_recorded", "value": "37", "unit": "lbf*in",
            "fastener": "Bolt 1, upper forward", "instrument_pick": "TW-017"}
    page = mechanic.get(f"/jobs/{installation.id}").get_data(as_text=True)
    refused = mechanic.post_form(url, {**form, "event_id": _event_id(page),
                                       "instrument_id": "TW-009"})
    assert refused.status_code == 409
    assert "was due for calibration on 2026-11-15" in refused.get_data(as_text=True)
    page = mechanic.get(f"/jobs/{installation.id}").get_data(as_text=True)
    answer = mechanic.post_form(url, {**form, "event_id": _event_id(page)})
    assert answer.status_code == 303
    assert installation.state()["readings"][-1]["instrument"]["id"] == "TW-017"


# --- the admin page --------------------------------------------------------------------------

def test_the_admin_page_lists_the_register_and_shows_the_overdue_wrench(login):
    page = login("admin").get("/instruments").get_data(as_text=True)
    row = re.search(r'data-testid="instrument-TW-009".*?</tr>', page, re.S).group(0)
    assert "2026-11-15" in row and "overdue for calibration" in row
    row = re.search(r'data-testid="instrument-AM-002".*?</tr>', page, re.S).group(0)
    assert "quarantined" in row
    row = re.search(r'data-testid="instrument-TW-017".*?</tr>', page, re.S).group(0)
    assert "in service, in calibration" in row and "20–100 lbf·in" in row


def test_the_admin_adds_calibrates_and_withdraws_and_each_change_is_kept(login, db):
    admin = login("admin")
    added = admin.post_form("/instruments", {
        "action": "add", "instrument_id": "EG-020", "kind": "erosion gauge", "range_low": "0",
        "range_high": "0.1", "range_unit": "in", "calibration_due": "2027-02-01"})
    assert added.status_code == 303
    assert admin.post_form("/instruments", {"action": "calibrated", "instrument_id": "EG-020",
                                            "calibration_due": "2027-08-01"}).status_code == 303
    assert admin.post_form("/instruments", {"action": "take_out", "instrument_id": "EG-020",
                                            "status": "withdrawn"}).status_code == 303
    now = register.instrument(db, "EG-020")
    assert (now.status, now.calibration_due.isoformat()) == ("withdrawn", "2027-08-01")
    changes = [e["change"] for e in register.history(db, "EG-020")]
    assert changes == ["added", "calibrated, due 2027-08-01", "withdrawn"]
    page = admin.get("/instruments").get_data(as_text=True)
    assert "Dana Whitcombe" in page   # who made each change (demo admin, invented)


@pytest.mark.parametrize(("field", "value", "said"), [
    ("instrument_id", "TW-017", "already in the register"),
    ("kind", "hammer", "Choose the kind"),
    ("range_high", "5", "above its bottom"),
    ("range_unit", "V", "torque is needed"),
    ("calibration_due", "soon", "YYYY-MM-DD"),
])
def test_a_bad_entry_is_refused_with_its_reason_and_nothing_is_kept(login, db, field, value,
                                                                   said):
    entries = db["instrument_entries"].count
    good = {"action": "add", "instrument_id": "TW-200", "kind": "torque wrench",
            "range_low": "10", "range_high": "50", "range_unit": "N*m",
            "calibration_due": "2027-05-01"}
    answer = login("admin").post_form("/instruments", {**good, field: value})
    assert answer.status_code == 422
    assert said in answer.get_data(as_text=True)
    assert db["instrument_entries"].count == entries


def test_a_mechanic_cannot_open_the_register_page(mechanic):
    assert mechanic.get("/instruments").status_code == 403
