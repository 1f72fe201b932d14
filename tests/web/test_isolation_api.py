"""Isolation verified and the lead grounded, through the JSON API as a mechanic skipping the
checks would try: every refusal is a 409 naming its rule, bad input a 422 naming the field,
and nothing but the refusal is stored.

Sources: 29 CFR 1910.147(d)(6) (verification of isolation before work); the 15 min
grounding window and the 0.5 V isolation limit of the demo procedures are common practice,
no source. Demo data only (the QT-610 and its people are invented).
"""

from __future__ import annotations

import pytest

from tests.web.jobs import DEMO_101_ENGINE_1, Job, _event
from webapp.store import jobs as job_store

WINDOW_S = 15 * 60   # common practice, no source


@pytest.fixture
def plug(mechanic, db, clock):
    return Job(mechanic, db, clock, "igniter-plug-replacement", channel="A",
               engine=DEMO_101_ENGINE_1)


def _isolation(volts, unit="V"):
    return _event("verify-isolation", "reading_recorded", instrument_id="VM-004",
                  value=volts, unit=unit)


def test_skipping_the_isolation_check_to_work_on_the_lead_or_a_part_is_refused(plug):
    plug.walk_to("verify-isolation")
    for step, kind in (("disconnect-lead", "step_done"), ("removed-plug", "part_recorded"),
                       ("reconnect-lead", "step_done")):
        refused = plug.refused(_event(step, kind), "isolation_not_verified")
        assert "isolation" in refused["reason"] and refused["step"] == step


def test_voltage_present_stops_the_job_until_a_finding_and_a_new_check(plug):
    plug.walk_to("verify-isolation")
    answer = plug.ok(_isolation("27.4")).get_json()   # a 28 V DC bus still live (demo)
    assert answer["data"]["verdict"] == "out of limits"
    assert answer["data"]["isolation"] == "not verified"
    assert plug.state()["awaiting_finding"] == ["verify-isolation"]
    plug.refused(_event("disconnect-lead"), "isolation_not_verified")
    plug.refused(_event("verify-isolation", "finding", text="27 V at pin A",
                        disposition="deferred", reference="DD-9", limit="10 FH"),
                 "isolation_not_deferrable")
    plug.ok(_event("verify-isolation", "finding", text="Channel A breaker was the wrong one; "
                   "opened and tagged the right one", disposition="repaired"))
    assert plug.state()["next_step"] == "verify-isolation"
    plug.ok(_isolation("12", unit="mV"))   # 12 mV = 0.012 V: within 0.5 V
    plug.ok(_event("disconnect-lead"))


@pytest.mark.parametrize("data, field", [
    ({}, "data.value"),
    ({"value": "none", "unit": "V"}, "data.value"),
    ({"value": "0.1", "unit": "ohm"}, "data.value_unit"),
])
def test_a_bad_isolation_reading_is_a_422_naming_the_field_and_stores_nothing(plug, db,
                                                                              data, field):
    plug.walk_to("verify-isolation")
    before = len(job_store.events(db, plug.id))
    answer = plug.post(_event("verify-isolation", "reading_recorded", **data))
    assert answer.status_code == 422, answer.get_json()
    assert answer.get_json()["problems"][0]["field"] == field
    assert len(job_store.events(db, plug.id)) == before


def test_reconnecting_the_lead_after_a_long_pause_asks_for_grounding_again(plug, clock):
    plug.walk_to("ground-lead-terminal")
    plug.ok(_event("ground-lead-terminal"))
    assert "ground-lead-terminal" in plug.state()["done"]
    plug.walk_to("reconnect-lead")
    clock.advance(WINDOW_S + 1)   # a break: one second past the window
    refused = plug.refused(_event("reconnect-lead"), "grounding_lapsed")
    assert refused["seconds_since"] > WINDOW_S and refused["valid_for_s"] == WINDOW_S
    assert "ground" in refused["reason"].lower() and "again" in refused["reason"]
    plug.ok(_event(None, "lead_grounded"))
    plug.ok(_event("reconnect-lead"))


def test_grounding_again_is_refused_before_the_procedure_s_grounding_step(plug):
    plug.walk_to("verify-isolation")
    plug.refused(_event(None, "lead_grounded"), "grounding_step_first")


def test_the_functional_check_has_no_lead_to_ground(mechanic, db, clock):
    check = Job(mechanic, db, clock, "ignition-functional-check", channel=None,
                engine=DEMO_101_ENGINE_1)
    check.refused(_event(None, "lead_grounded"), "no_grounding_step")


def test_the_plug_change_leaves_its_seat_leak_check_open_on_the_engine(plug):
    plug.walk_to("seat-leak-due")
    plug.ok(_event("seat-leak-due"))
    [item] = [i for i in plug.state()["engine_state"]["open_items"]
              if i["reference"] == f"J{plug.id}-seat-leak-due"]
    assert item["text"] == ("Igniter plug seat leak check at the next engine run after the "
                            "plug change (channel A)")
    assert item["limit"] == "next engine run"
    plug.ok(_event(None, "item_closed", item=item["id"], how="Ground run 14:10: no gas or soot "
                   "at the seat (demo)"))
    assert not [i for i in plug.state()["engine_state"]["open_items"]
                if i["reference"] == item["reference"]]


def test_the_step_screen_offers_to_record_grounding_again_when_it_lapsed(plug, mechanic,
                                                                         clock):
    plug.walk_to("reconnect-lead")
    page = mechanic.get(f"/jobs/{plug.id}").get_data(as_text=True)
    assert 'data-testid="grounded-at"' in page and 'data-testid="grounding-due"' not in page
    clock.advance(WINDOW_S + 60)
    page = mechanic.get(f"/jobs/{plug.id}").get_data(as_text=True)
    assert 'data-testid="grounding-due"' in page
    assert 'data-testid="lead-grounded"' in page
