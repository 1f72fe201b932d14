"""Readings through the API: units converted, limits judged, senseless input refused with the
field and nothing stored, out-of-limits blocked until a finding is dispositioned."""

from __future__ import annotations

from datetime import timedelta

import pytest

from tests.web.jobs import Job, _event
from webapp.records.pdf import record_html
from webapp.store import jobs as job_store

LBF_IN_IN_N_M = 0.1129848  # NIST SP 811 B.9: 1 lbf·in = 0.1129848 N·m


# The demo bracket's four bolts, each torqued and judged on its own (tasks/ demo data).
BOLTS = ["Bolt 1, upper forward", "Bolt 2, lower aft", "Bolt 3, upper aft",
         "Bolt 4, lower forward"]


def torque(value, unit="lbf*in", fastener=BOLTS[0], **extra):
    body = {"value": value, "unit": unit, "instrument_id": "TW-017", "fastener": fastener,
            **extra}
    return _event("mounting-torque", "reading_recorded", **body)


def the_other_bolts(job):
    """Bolts 2 to 4 at 37 lbf·in (within 35–40): the step is done when each bolt stands."""
    for bolt in BOLTS[1:]:
        assert "mounting-torque" not in job.state()["done"]
        job.ok(torque("37", fastener=bolt))


def counts(job):
    return (len(job_store.events(job.db, job.id)), len(job_store.refusals(job.db, job.id)))


def test_torque_in_n_m_is_converted_and_judged(installation):
    installation.ok(torque("4.2", "N*m"))  # 4.2 / 0.1129848 = 37.17 lbf·in, limits 35–40
    reading = installation.state()["readings"][-1]
    assert reading["value"] == 4.2 and reading["unit"] == "N*m"
    assert reading["converted"] == pytest.approx(4.2 / LBF_IN_IN_N_M, rel=1e-6)
    assert reading["verdict"] == "within"
    assert reading["instrument"] == {"id": "TW-017", "kind": "torque wrench",
                                     "range": "20–100 lbf*in", "range_low": 20,
                                     "range_high": 100, "range_unit": "lbf*in",
                                     "calibration_due": "2027-06-30"}
    assert reading["fastener"] == BOLTS[0]
    the_other_bolts(installation)
    assert "mounting-torque" in installation.state()["done"]


@pytest.mark.parametrize("value, unit, field", [
    ("abc", "lbf*in", "value"),
    ("", "lbf*in", "value"),
    ("NaN", "lbf*in", "value"),
    ("inf", "lbf*in", "value"),
    ("37", "furlongs", "value_unit"),        # not a unit
    ("37", "mm", "value_unit"),              # a unit of the wrong dimension
    ("1e9", "lbf*in", "value"),              # absurd magnitude
    ("-37", "lbf*in", "value"),
])
def test_senseless_torque_is_refused_at_the_field_and_nothing_stored(installation, value, unit,
                                                                    field):
    before = counts(installation)
    answer = installation.post(torque(value, unit))
    assert answer.status_code == 422
    body = answer.get_json()
    assert body["rule"] == "bad_input" and body["problems"][0]["field"] == f"data.{field}"
    assert counts(installation) == before  # not even a refusal entry


def test_missing_instrument_is_bad_input_and_nothing_is_stored(installation):
    body = torque("37")
    del body["data"]["instrument_id"]
    before = counts(installation)
    answer = installation.post(body)
    assert answer.status_code == 422
    assert answer.get_json()["problems"][0]["field"] == "data.instrument_id"
    assert counts(installation) == before


def test_out_of_limits_blocks_until_dispositioned_and_keeps_every_attempt(installation):
    installation.ok(torque("45"))                                     # above 40 lbf·in
    state = installation.state()
    assert state["awaiting_finding"] == ["mounting-torque"]
    assert state["next_step"] == "mounting-torque"
    installation.refused(torque("37"), "finding_required")            # no quiet re-try
    installation.refused(_event("bonding-resistance", "reading_recorded"), "out_of_order")
    bad = installation.post(_event("mounting-torque", "finding", text="over-torqued",
                                   disposition="deferred"))
    assert bad.status_code == 422                                     # a deferral needs its ref
    installation.ok(_event("mounting-torque", "finding", text="over-torqued; bolts backed off "
                           "and re-torqued", disposition="re-tested"))
    installation.ok(torque("38"))
    readings = [r for r in installation.state()["readings"] if r["step"] == "mounting-torque"]
    assert [r["attempt"] for r in readings] == [1, 2]
    assert readings[0]["converted"] == 45 and readings[0]["verdict"] == "out of limits"
    assert readings[0]["finding"]["disposition"] == "re-tested"
    the_other_bolts(installation)
    assert "mounting-torque" in installation.state()["done"]


def test_a_deferral_with_its_reference_lets_the_job_go_on(installation):
    installation.ok(torque("45"))
    installation.ok(_event("mounting-torque", "finding", text="bracket thread damaged",
                           disposition="deferred", reference="DD-2026-117",
                           limit="25 engine hours or 2027-01-15"))
    assert installation.state()["next_step"] == "mounting-torque"   # three bolts to go
    the_other_bolts(installation)
    assert installation.state()["next_step"] == "bonding-resistance"


def test_finding_without_an_out_of_limits_reading_is_refused(installation):
    installation.refused(_event("mounting-torque", "finding", text="x", disposition="replaced"),
                         "no_reading_to_disposition")


def test_adapter_correction_judges_the_torque_applied(mechanic, db, clock):
    job = Job(mechanic, db, clock, "igniter-plug-replacement")
    job.walk_to("plug-torque")
    # FAA AC 43.13-1B 7-40 (from memory): T_set = T_req·L/(L+E). With L = 12 in and
    # E = 2 in, a wrench set to 235.7 lbf·in applies 235.7·14/12 = 275 lbf·in (limits 250–300).
    body = _event("plug-torque", "reading_recorded", value="235.7", unit="lbf*in",
                  instrument_id="TW-031",
                  adapter={"wrench_length": "12", "extension": "2", "angle": "0"})
    job.ok(body)
    reading = job.state()["readings"][-1]
    assert reading["applied"] == pytest.approx(235.7 * 14 / 12, rel=1e-9)
    assert reading["verdict"] == "within"


def test_insulation_resistance_keeps_its_test_conditions(mechanic, db, clock):
    job = Job(mechanic, db, clock, "ignition-lead-inspection")
    job.walk_to("insulation-resistance")
    body = _event("insulation-resistance", "reading_recorded", instrument_id="IT-003",
                  value="0.85", unit="Gohm",
                  test_voltage={"value": "1", "unit": "kV"},
                  ambient_temperature={"value": "64", "unit": "degF"}, humidity={"value": "55"})
    job.ok(body)
    reading = job.state()["readings"][-1]
    assert reading["converted"] == pytest.approx(850.0)           # 0.85 GΩ = 850 MΩ
    assert reading["test_voltage"]["converted"] == pytest.approx(1000.0)
    # (64 − 32) × 5/9 = 17.78 °C (the definition of the Fahrenheit scale)
    assert reading["ambient_temperature"]["converted"] == pytest.approx(17.7778, rel=1e-4)
    assert reading["humidity"] == {"value": 55.0, "unit": "%RH"}
    missing = _event("insulation-resistance", "reading_recorded", instrument_id="IT-003",
                     value="900", unit="Mohm")
    assert job.post(missing).status_code in (409, 422)  # already done, or missing conditions


@pytest.mark.parametrize(("value", "unit"), [("500", "V"), ("2.5", "kV"), ("940", "V")])
def test_insulation_at_another_test_voltage_is_refused_with_the_reason(mechanic, db, clock,
                                                                     value, unit):
    # The demo step sets 1000 V (invented demo data); the station holds the tester to it
    # within ±5 % (station rule): 500 V, 2.5 kV and 940 V are refused, 950 V-1050 V pass.
    job = Job(mechanic, db, clock, "ignition-lead-inspection")
    job.walk_to("insulation-resistance")
    conditions = {"ambient_temperature": {"value": "18", "unit": "degC"},
                  "humidity": {"value": "45"}}
    refused = job.refused(_event("insulation-resistance", "reading_recorded",
                                 instrument_id="IT-003", value="900", unit="Mohm",
                                 test_voltage={"value": value, "unit": unit},
                                 **conditions), "wrong_test_voltage")
    assert "1000 V" in refused["reason"]
    job.ok(_event("insulation-resistance", "reading_recorded", instrument_id="IT-003",
                  value="900", unit="Mohm",
                  test_voltage={"value": "1.05", "unit": "kV"}, **conditions))


def test_insulation_without_its_conditions_is_bad_input(mechanic, db, clock):
    job = Job(mechanic, db, clock, "ignition-lead-inspection")
    job.walk_to("insulation-resistance")
    answer = job.post(_event("insulation-resistance", "reading_recorded", instrument_id="IT-003",
                             value="900",
                             unit="Mohm"))
    assert answer.status_code == 422
    assert answer.get_json()["problems"][0]["field"] == "data.test_voltage"


def test_wear_reading_is_tied_to_the_plug_and_its_usage(mechanic, db, clock):
    job = Job(mechanic, db, clock, "igniter-plug-replacement", channel="B")
    job.walk_to("erosion")
    job.ok(_event("erosion", "reading_recorded", instrument_id="EG-011", value="0.047", unit="in",
                  usage={"engine_hours": "812", "starts": "760",
                         "continuous_ignition_hours": "150",
                         "continuous_ignition_estimated": True}))
    reading = job.state()["readings"][-1]
    assert reading["converted"] == pytest.approx(0.047 * 25.4)  # 1 in = 25.4 mm exactly
    assert reading["plug"]["channel"] == "B" and reading["plug"]["serial"].startswith("XP-")
    assert reading["usage"] == {"engine_hours": 812.0, "starts": 760,
                                "continuous_ignition_hours": 150.0,
                                "continuous_ignition_estimated": True}
    assert reading["verdict"] == "near limit"  # 1.19 mm: within 0.10 of the 1.20 mm limit


# --- spark counts ----------------------------------------------------------------------------

@pytest.fixture
def check(mechanic, db, clock):
    job = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    job.walk_to("count-a")
    return job


def test_tapped_count_gives_the_rate_and_flags_a_double_tap(check):
    taps = [i * 0.75 for i in range(12)]          # 60 / 0.75 = 80 per minute
    taps.insert(5, taps[4] + 0.1)                  # a double tap
    check.count("count-a", method="taps", taps=taps)
    reading = check.state()["readings"][-1]
    assert reading["rate"] == pytest.approx(80.0)
    assert reading["double_taps"] == [5]
    assert reading["verdict"] == "within"
    page = check.client.get(f"/jobs/{check.id}").get_data(as_text=True)
    assert "80 per minute (1 double tap(s) left out)" in page  # shown once the step is done


def test_timed_count_gives_rate_with_its_resolution(check):
    check.count("count-a", method="timed", count=36, window_s=30)
    reading = check.state()["readings"][-1]
    assert reading["rate"] == 72.0 and reading["resolution"] == 2.0  # 36/30·60; ±60/30


@pytest.mark.parametrize("data, field", [
    ({"method": "taps", "taps": [0.0, 0.7]}, "taps"),                   # too few
    ({"method": "taps", "taps": [0.0, 0.7, 0.5]}, "taps"),              # not increasing
    ({"method": "taps", "taps": "many"}, "taps"),
    ({"method": "timed", "count": -3, "window_s": 30}, "count"),
    ({"method": "timed", "count": "lots", "window_s": 30}, "count"),
    ({"method": "timed", "count": 36, "window_s": 45}, "window_s"),
    ({"method": "timed", "count": 900, "window_s": 30}, "count"),      # absurd
    ({"method": "guess"}, "method"),
])
def test_senseless_counts_are_refused_and_nothing_stored(check, data, field):
    before = counts(check)
    answer = check.post(_event("count-a", "sparks_counted", **data))
    assert answer.status_code == 422
    assert answer.get_json()["problems"][0]["field"] == f"data.{field}"
    assert counts(check) == before


def test_a_count_is_taken_over_time_the_station_saw_pass(check, clock):
    timed = {"method": "timed", "count": 36, "window_s": 30, "supply": {"voltage": "27.5"}}
    # Not started on the station: refused, whatever the tablet says.
    check.refused(_event("count-a", "sparks_counted", **timed), "count_not_started")
    check.start_count("count-a")
    clock.advance(10)
    refused = check.refused(_event("count-a", "sparks_counted", **timed), "count_window_open")
    assert refused["seconds_remaining"] == 20
    # A device clock that says the window is over does not shorten the station's.
    started_device = clock() - timedelta(seconds=10)
    early = {**_event("count-a", "sparks_counted", **timed),
             "device_time": (started_device + timedelta(seconds=40)).isoformat()}
    check.refused(early, "count_window_open")
    clock.advance(20)
    check.ok(_event("count-a", "sparks_counted", **timed))
    # The window is used up: the next count (after a finding, or on a later attempt) starts
    # its own.
    assert check.state()["next_step"] != "count-a"


def test_taps_spanning_longer_than_the_time_since_the_start_are_refused(check, clock):
    check.start_count("count-a")
    clock.advance(5)
    taps = [i * 0.75 for i in range(12)]          # 8.25 s of taps, only 5 s after the start
    tapped = {"method": "taps", "taps": taps, "supply": {"voltage": "27.5"}}
    check.refused(_event("count-a", "sparks_counted", **tapped), "count_window_open")
    clock.advance(4)
    check.ok(_event("count-a", "sparks_counted", **tapped))


@pytest.mark.parametrize(("supply", "field"), [
    (None, "supply_voltage"), ({"voltage": ""}, "supply_voltage"),
    ({"voltage": "lots"}, "supply_voltage"), ({"voltage": "-28"}, "supply_voltage")])
def test_a_count_without_its_supply_is_refused_at_the_field(check, clock, supply, field):
    check.start_count("count-a")
    clock.advance(30)
    data = {"method": "timed", "count": 36, "window_s": 30}
    if supply is not None:
        data["supply"] = supply
    answer = check.post(_event("count-a", "sparks_counted", **data))
    assert answer.status_code == 422
    assert answer.get_json()["problems"][0]["field"] == f"data.{field}"


def test_a_count_at_a_supply_outside_its_limits_is_out_of_limits(check):
    # MIL-STD-704F normal steady-state 28 V DC bus: 22-29 V (from memory). 21 V is outside:
    # a DC unit's rate follows its supply, so this count proves nothing and needs a finding.
    check.count("count-a", method="timed", count=36, window_s=30, supply={"voltage": "21"})
    reading = check.state()["readings"][-1]
    assert reading["supply"]["within"] is False and reading["verdict"] == "out of limits"
    assert check.state()["awaiting_finding"] == ["count-a"]


def test_count_out_of_limits_needs_a_finding(check):
    check.count("count-a", method="timed", count=20, window_s=30)
    assert check.state()["awaiting_finding"] == ["count-a"]


def test_both_channels_checked_against_a_plus_b(check):
    check.walk_to("count-both")   # A 36/30 s and B 36/30 s by the walk (demo counts)
    # A = B = 72 and the ear hears 72 with both on: two independent units are heard near
    # their sum, so one is not firing: out of limits, and a finding is asked for.
    check.count("count-both", method="timed", count=36, window_s=30)
    reading = check.state()["readings"][-1]
    assert reading["both_check"]["result"] == "one unit not firing"
    assert reading["both_check"]["expected"] == 144.0
    assert reading["verdict"] == "out of limits"
    assert check.state()["awaiting_finding"] == ["count-both"]
    check.ok(_event("count-both", "finding", text="Channel B silent with both selected",
                    disposition="re-tested"))
    check.count("count-both", method="timed", count=72, window_s=30)
    assert check.state()["readings"][-1]["both_check"]["result"] == "consistent"


def test_combined_rate_of_one_channel_says_one_unit_is_not_firing(mechanic, db, clock):
    job = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    job.walk_to("count-a")
    job.count("count-a", method="timed", count=36, window_s=30)  # 72
    job.walk_to("count-b")
    job.count("count-b", method="timed", count=34, window_s=30)  # 68
    job.walk_to("count-both")
    # Demo functional check (invented): 70/30 s = 140 ≈ 72 + 68 = 140: consistent.
    job.count("count-both", method="timed", count=70, window_s=30)
    assert job.state()["readings"][-1]["both_check"]["result"] == "consistent"


def test_both_without_the_single_counts_is_refused(mechanic, db, clock):
    job = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    job.walk_to("count-a")
    # The order of steps already keeps count-both after the single counts.
    job.refused(_event("count-both", "sparks_counted", method="timed", count=70,
                       window_s=30), "out_of_order")


@pytest.mark.parametrize("disposition", ["replaced", "repaired"])
def test_a_replaced_or_repaired_finding_needs_the_re_test_reading(installation, app, clock,
                                                                  db, disposition):
    installation.ok(torque("45"))                                     # above 40 lbf·in
    installation.ok(_event("mounting-torque", "finding", text="bolt thread stripped",
                           disposition=disposition))
    # Not done yet: the step waits for its new reading, and nothing after it goes in.
    assert installation.state()["next_step"] == "mounting-torque"
    installation.refused(_event("bonding-resistance", "reading_recorded"), "out_of_order")
    with app.app_context():
        html = record_html(db, installation.id, clock(), embedded=True)
    assert f"{disposition}; re-test reading not yet recorded" in html
    installation.ok(torque("38"))
    the_other_bolts(installation)
    assert installation.state()["next_step"] == "bonding-resistance"
    with app.app_context():
        html = record_html(db, installation.id, clock(), embedded=True)
    flat = " ".join(html.split())
    assert f"{disposition}, re-tested: attempt 2, 38 lbf·in ✓ within" in flat
