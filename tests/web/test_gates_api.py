"""Bypass tests through the JSON API: every gate tried out of order, too early, by the wrong
person and twice; each refused with its rule, nothing stored but the refusal log entry."""

from __future__ import annotations

import pytest

from tests.conftest import DEMO_PINS
from tests.web.jobs import DEMO_101_ENGINE_1, Job, _event
from webapp.store import jobs as job_store


@pytest.fixture
def removal(mechanic, db, clock):
    return Job(mechanic, db, clock, "exciter-removal")


# --- lockout / tagout ---------------------------------------------------------------------

def test_tag_before_the_lockout_step_is_out_of_order(removal):
    removal.refused(_event("breakers", "breaker_tagged", breaker="IGN-A", tag="T-1"),
                    "out_of_order")


def test_lockout_rules(removal):
    removal.walk_to("breakers")
    tag = lambda breaker, number: _event("breakers", "breaker_tagged",  # noqa: E731
                                         breaker=breaker, tag=number)
    removal.refused(_event("breakers"), "lockout_incomplete")          # too early
    removal.refused(tag("IGN-C", "T-1"), "unknown_breaker")
    removal.refused(tag("IGN-A", "  "), "tag_number_missing")
    removal.ok(tag("IGN-A", "T-1"))
    removal.refused(tag("IGN-B", "T-1"), "tag_in_use")                # the same tag twice
    removal.refused(tag("IGN-A", "T-9"), "already_tagged")            # the breaker twice
    removal.refused(_event("breakers"), "lockout_incomplete")
    removal.ok(tag("IGN-B", "T-2"))
    removal.ok(_event("breakers"))
    removal.refused(_event("breakers"), "already_done")


def test_no_later_step_before_the_lockout(removal):
    removal.walk_to("breakers")
    removal.refused(_event("disconnect-input"), "out_of_order")
    removal.refused(_event("discharge"), "out_of_order")
    # Work on a connection says why it is dangerous: the isolation is not verified
    # (29 CFR 1910.147(d)(6)), before the order of steps is even asked about.
    removal.refused(_event("disconnect-leads"), "isolation_not_verified")


def test_a_second_job_on_the_engine_sees_the_tags_and_whose(removal, login, db, clock):
    removal.walk_to("input-first")
    other = login("mech2")
    html = other.get(f"/fleet/engines/{DEMO_101_ENGINE_1}").get_data(as_text=True)
    assert 'data-testid="engine-tag-T-1"' in html and "Aino Varga" in html
    second = Job(other, db, clock, "exciter-installation", channel="B")
    page = other.get(f"/jobs/{second.id}").get_data(as_text=True)
    assert 'data-testid="engine-tag-T-2"' in page


# --- discharge wait -------------------------------------------------------------------------

def test_discharge_wait_refused_one_second_early_and_accepted_at_the_limit(removal, clock):
    removal.walk_to("discharge")
    clock.advance(119)
    refusal = removal.refused(_event("discharge"), "discharge_wait")
    assert refusal["seconds_remaining"] == 1
    assert "1 more" not in refusal["reason"] and "0:01" in refusal["reason"]
    clock.advance(1)  # exactly the data's 2 min (the bleed-down estimate is ~34 s)
    removal.ok(_event("discharge"))
    removal.refused(_event("discharge"), "already_done")


def test_device_time_cannot_shorten_the_wait(removal, clock):
    removal.walk_to("disconnect-input")
    body = _event("disconnect-input")
    body["device_time"] = "2026-12-01T08:00:00+00:00"
    removal.ok(body)
    clock.advance(600)  # the station has waited long enough...
    late = _event("discharge")
    late["device_time"] = "2026-12-01T08:01:00+00:00"  # ...but the tablet says one minute
    assert removal.refused(late, "discharge_wait")["seconds_remaining"] == 60


def test_reconnecting_the_input_restarts_the_wait(removal, clock):
    removal.walk_to("discharge")
    clock.advance(300)
    removal.ok(_event(None, "input_reconnected"))
    assert removal.state()["next_step"] == "disconnect-input"
    removal.refused(_event("discharge"), "out_of_order")
    removal.ok(_event("disconnect-input"))
    clock.advance(60)
    assert removal.refused(_event("discharge"), "discharge_wait")["seconds_remaining"] == 60
    clock.advance(60)
    removal.ok(_event("discharge"))


def test_reconnect_without_a_disconnection_is_refused(removal):
    removal.refused(_event(None, "input_reconnected"), "power_not_removed")


def test_the_lead_cannot_be_touched_before_the_wait(removal, clock):
    removal.walk_to("discharge")
    removal.refused(_event("ground-lead", "acknowledged"), "out_of_order")
    # Work on the lead or the unit: the isolation is not verified yet (29 CFR 1910.147(d)(6)).
    for step in ("disconnect-leads", "remove-unit"):
        removal.refused(_event(step), "isolation_not_verified")


# --- release, handover, absent owner ----------------------------------------------------------

@pytest.fixture
def tagged_then_check(removal, login, db, clock):
    """mech1 tags both breakers in a removal job; mech2 opens the functional check."""
    removal.walk_to("input-first")
    other = login("mech2")
    return Job(other, db, clock, "ignition-functional-check", channel=None), other


def test_only_the_owner_removes_a_tag(tagged_then_check):
    check, _mech2 = tagged_then_check
    check.walk_to("release-tags")
    check.refused(_event("release-tags", "tag_removed", tag="T-1"), "tag_owner")
    check.refused(_event("release-tags"), "tags_still_on")


def test_handover_transfers_the_tag_only_after_the_owner_hands_it_over(tagged_then_check,
                                                                          mechanic):
    check, _ = tagged_then_check
    check.walk_to("release-tags")
    check.refused(_event(None, "tag_taken_over", tag="T-1", breaker_confirmed_open=True),
                  "no_consent")
    # mech1, the owner, hands T-1 over on their own session, with their PIN.
    check.ok(_event(None, "tag_handed_over", tag="T-1", to="mech2", pin=DEMO_PINS["mech1"]),
             mechanic)
    check.refused(_event(None, "tag_taken_over", tag="T-1"), "breaker_not_confirmed")
    check.refused(_event(None, "tag_taken_over", tag="T-404", breaker_confirmed_open=True),
                  "tag_not_active")
    check.ok(_event(None, "tag_taken_over", tag="T-1", breaker_confirmed_open=True))
    check.refused(_event(None, "tag_taken_over", tag="T-1", breaker_confirmed_open=True),
                  "already_owner")
    check.ok(_event("release-tags", "tag_removed", tag="T-1"))
    check.refused(_event("release-tags", "tag_removed", tag="T-1"), "tag_not_active")


def test_absent_owner_removal_is_authorised_by_the_supervisor_s_own_entry(tagged_then_check,
                                                                           login):
    check, _ = tagged_then_check
    check.walk_to("release-tags")
    check.refused(_event("release-tags", "tag_removed", tag="T-2", absent_owner={
        "reason": "left site at 18:00", "supervisor": "super"}), "absent_owner_typed")
    supervisor = login("super")
    authorise = lambda reason: _event("release-tags", "tag_removal_authorised",  # noqa: E731
                                      tag="T-2", reason=reason, pin=DEMO_PINS["super"])
    check.refused(authorise(" "), "reason_missing", supervisor)
    check.ok(authorise("left site at 18:00, phone unanswered twice"), supervisor)
    check.ok(_event("release-tags", "tag_removed", tag="T-2"))
    authorisation, removal = job_store.events(check.db, check.id)[-2:]
    assert authorisation["data"]["reason"] == "left site at 18:00, phone unanswered twice"
    assert "pin" not in authorisation["data"]
    assert removal["data"] == {"tag": "T-2", "absent_owner_authorisation": authorisation["id"]}


def test_a_tag_hung_after_the_release_blocks_energising_with_the_owner_named(
        check, login, db, clock):
    check.walk_to("run-a-dc")   # released (nothing hung), gate confirmed
    removal = Job(login("mech2"), db, clock, "exciter-removal")
    removal.walk_to("input-first", tags=("T-7", "T-8"))  # someone else locks out meanwhile
    refusal = check.refused(_event("run-a-dc", "energised"), "tags_active")
    assert "Tomas Reyes" in refusal["reason"] and refusal["tags"] == ["T-7", "T-8"]


# --- pre-energising gate and duty cycle ----------------------------------------------------------

@pytest.fixture
def check(mechanic, db, clock):
    return Job(mechanic, db, clock, "ignition-functional-check", channel=None)


def test_energising_before_the_gate_names_the_gate(check):
    check.walk_to("pre-energising")
    refusal = check.refused(_event("run-a-dc", "energised"), "pre_energising_gate")
    assert "pre-energising" in refusal["reason"]


RUN_TWICE = """
id: bench-run-twice
title: Two runs on channel A (test procedure, invented)
ata: 74-00
kind: functional check
channel: all
source: {document: Test data, section: none, revision: "1"}
effectivity: {engine_models: [QT-610], exciter_types: [dc, transistorised, ac],
              plug_types: [air-gap, surface-discharge]}
preliminary: {conditions: none, tools: none, supplies: none, spares: none, safety: none}
steps:
  - {id: gate, kind: check, text: Gate confirmed, before_energising: true}
  - id: run-1
    kind: ignition_run
    text: First run
    channel: A
    duty_cycle: {pattern: ["on 2 min", "off 3 min", "on 2 min", "off 23 min"]}
  - {id: off-1, kind: check, text: Selector off, ignition_off: true}
  - id: run-2
    kind: ignition_run
    text: Second run
    channel: A
    duty_cycle: {pattern: ["on 2 min", "off 3 min", "on 2 min", "off 23 min"]}
  - {id: off-2, kind: check, text: Selector off, ignition_off: true}
  - id: run-3
    kind: ignition_run
    text: Third run
    channel: A
    duty_cycle: {pattern: ["on 2 min", "off 3 min", "on 2 min", "off 23 min"]}
after_completion: none
"""


@pytest.fixture
def two_runs(mechanic, db, clock, tmp_path):
    from webapp.station.library import load_shop_library

    path = tmp_path / "bench-run-twice.yaml"
    path.write_text(RUN_TWICE, encoding="utf-8")
    load_shop_library(db, clock(), [path])
    return Job(mechanic, db, clock, "bench-run-twice", channel=None)


def test_duty_cycle_off_periods_through_the_api(two_runs, clock):
    job = two_runs
    job.refused(_event("run-1", "energised"), "pre_energising_gate")
    job.ok(_event("gate"))
    job.ok(_event("run-1", "energised"))
    clock.advance(120)
    job.ok(_event("off-1"))                         # selector off: A's 3 min off starts
    clock.advance(179)
    refusal = job.refused(_event("run-2", "energised"), "duty_cycle_off")
    assert refusal["seconds_remaining"] == 1 and refusal["channel"] == "A"
    clock.advance(1)
    job.ok(_event("run-2", "energised"))
    clock.advance(150)                              # past the 2 min on-limit
    state = job.state()
    assert state["ignition"]["A"]["on"] is True
    assert state["ignition"]["A"]["on_remaining_s"] == -30
    job.ok(_event("off-2"))
    clock.advance(180)                              # after the 2nd run the off time is 23 min
    assert job.refused(_event("run-3", "energised"),
                       "duty_cycle_off")["seconds_remaining"] == 1200
    # Another tablet resumes mid-cycle: the station says the same.
    assert job.state()["ignition"]["A"]["next_on_allowed_in_s"] == 1200


def test_de_energising_is_never_held_back_but_must_switch_something_off(check, clock):
    check.refused(_event(None, "de_energised"), "not_on")
    check.walk_to("run-a-dc")
    check.ok(_event("run-a-dc", "energised"))
    clock.advance(30)
    check.ok(_event(None, "de_energised", channel="A"))
    check.refused(_event(None, "de_energised", channel="A"), "not_on")
    check.refused(_event(None, "de_energised", channel="C"), "unknown_channel")


def test_same_event_twice_is_stored_once(removal):
    body = _event("identify")
    first, again = removal.post(body), removal.post(body)
    assert (first.status_code, again.status_code) == (201, 200)
    assert first.get_json() == again.get_json()
