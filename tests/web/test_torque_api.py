"""Torque through the API as a mechanic's tablet sends it: one reading per named fastener,
each with its own verdict; an adapter at an angle judged by its effective extension; a step
that needs the adapter in line refuses another angle. Refusals store nothing."""

from __future__ import annotations

import math

import pytest

from tests.web.jobs import Job, _event
from tests.web.test_readings import BOLTS, counts, torque
from webapp.records.pdf import record_html


def test_a_reading_without_its_fastener_is_refused_at_the_field_and_nothing_stored(
        installation):
    before = counts(installation)
    for fastener in (None, "", "Bolt 9", ["Bolt 1, upper forward"]):
        answer = installation.post(torque("37", fastener=fastener))
        assert answer.status_code == 422, fastener
        body = answer.get_json()
        assert body["problems"][0]["field"] == "data.fastener"
        if not isinstance(fastener, list):  # a list is refused by its shape, before the rules
            assert "Bolt 1, upper forward; Bolt 2, lower aft" in body["reason"]  # what is left
    assert counts(installation) == before


def test_a_bolt_torqued_within_limits_is_not_torqued_again(installation):
    installation.ok(torque("37"))
    answer = installation.refused(torque("38"), "fastener_done")
    assert "Bolt 2, lower aft; Bolt 3, upper aft; Bolt 4, lower forward" in answer["reason"]
    assert [r["fastener"] for r in installation.state()["readings"]
            if r["step"] == "mounting-torque"] == [BOLTS[0]]


def test_one_bolt_out_of_limits_holds_the_step_until_its_own_re_test(installation, app,
                                                                     db, clock):
    installation.ok(torque("37", fastener=BOLTS[0]))
    installation.ok(torque("45", fastener=BOLTS[1]))                 # above 40 lbf·in
    installation.refused(torque("37", fastener=BOLTS[2]), "finding_required")
    installation.ok(_event("mounting-torque", "finding", text="bolt 2 over-torqued",
                           disposition="replaced"))
    installation.ok(torque("37", fastener=BOLTS[2]))
    installation.ok(torque("37", fastener=BOLTS[3]))
    # Three bolts stand; the replaced one waits for its own new reading.
    assert installation.state()["next_step"] == "mounting-torque"
    installation.refused(_event("bonding-resistance", "reading_recorded"), "out_of_order")
    installation.ok(torque("38", fastener=BOLTS[1]))
    assert installation.state()["next_step"] == "bonding-resistance"
    with app.app_context():
        flat = " ".join(record_html(db, installation.id, clock(), embedded=True).split())
    # The record names each bolt after its step's words (cut at a word near 60 characters),
    # and backs "re-tested" with that bolt's new reading.
    for bolt in BOLTS:
        assert f"Torque the mounting bolts in the sequence the approved data…: {bolt}" in flat
    assert "replaced, re-tested: attempt 5, 38 lbf·in ✓ within" in flat


@pytest.fixture
def plug_job(mechanic, db, clock):
    job = Job(mechanic, db, clock, "igniter-plug-replacement")
    job.walk_to("plug-torque")
    return job


def _plug_torque(setting, **adapter):
    return _event("plug-torque", "reading_recorded", value=f"{setting:.6f}", unit="lbf*in",
                  instrument_id="TW-031",
                  adapter={"wrench_length": "12", "extension": "2", **adapter})


def test_a_setting_worked_out_in_line_but_used_square_is_out_of_limits(plug_job):
    # Set for 275 lbf·in in line, 275 × 12 / 14 = 235.7; at 90° the crowfoot adds nothing
    # (E·cos 90° = 0, statics), so the plug gets 235.7, under its 250 minimum.
    plug_job.ok(_plug_torque(275 * 12 / 14, angle="90"))
    reading = plug_job.state()["readings"][-1]
    assert reading["applied"] == pytest.approx(275 * 12 / 14, rel=1e-6)
    assert reading["verdict"] == "out of limits"
    assert plug_job.state()["awaiting_finding"] == ["plug-torque"]


def test_an_angled_setting_worked_out_with_e_cos_theta_is_within(plug_job):
    # At 60°, E·cos θ = 1 in: set 275 × 12 / 13 = 253.85 for 275 at the plug (statics).
    setting = 275 * 12 / (12 + 2 * math.cos(math.radians(60)))
    plug_job.ok(_plug_torque(setting, angle="60"))
    reading = plug_job.state()["readings"][-1]
    assert reading["applied"] == pytest.approx(275.0, rel=1e-6)
    assert reading["adapter"]["angle"] == 60.0 and reading["verdict"] == "within"


@pytest.mark.parametrize(("adapter", "field"), [
    ({}, "angle"),                                 # an adapter's angle is not guessed
    ({"angle": "200"}, "angle"),
    ({"angle": "180", "extension": "10"}, "angle"),   # reaches back over the handle
])
def test_an_adapter_without_a_usable_angle_is_refused_and_nothing_stored(plug_job, adapter,
                                                                         field):
    before = counts(plug_job)
    answer = plug_job.post(_plug_torque(275 * 12 / 14, **adapter))
    assert answer.status_code == 422
    assert answer.get_json()["problems"][0]["field"] == f"data.{field}"
    assert counts(plug_job) == before


def test_a_step_that_needs_the_crowfoot_in_line_refuses_an_angle(plug_job):
    plug_job.ok(_plug_torque(275 * 12 / 14, angle="0"))
    plug_job.walk_to("coupling-nut-torque")
    body = _event("coupling-nut-torque", "reading_recorded", value="24", unit="lbf*in",
                  instrument_id="TW-017",
                  adapter={"wrench_length": "10", "extension": "1.5", "angle": "30"})
    answer = plug_job.refused(body, "adapter_not_in_line")
    assert "30°" in answer["reason"]
    # In line: 24 × (10 + 1.5) / 10 = 27.6 lbf·in at the nut, within 25–30.
    body["data"]["adapter"]["angle"] = "0"
    body["id"] = _event("x")["id"]
    plug_job.ok(body)
    assert plug_job.state()["readings"][-1]["applied"] == pytest.approx(27.6, rel=1e-9)
