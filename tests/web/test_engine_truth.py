"""The engine as the station's truth, through the JSON API: parts checked against what is
fitted, energising refused on a channel another job has open, and the duty-cycle clock that
follows the exciter's serial across jobs. The kept engine state equals a replay."""

from __future__ import annotations

import random

import pytest

from tests.web.jobs import DEMO_101_ENGINE_1, Job, _event
from webapp.store import engines
from webapp.store import fleet as fleet_store

USAGE = {"engine_hours": "812", "starts": "760"}


def fitted(db, kind="exciter", channel="A", engine=DEMO_101_ENGINE_1):
    return engines.current(db, engine).fitted(kind, channel)


def removal_of(db, **changes):
    part = fitted(db)
    return _event("removed-exciter", "part_recorded", **{
        "part_number": part.part_number, "serial": part.serial, "status": "unserviceable",
        "reason": "failed", "tag": "U-0042", "usage": USAGE, **changes})


def fitting(**changes):
    return _event("incoming-exciter", "part_recorded", **{
        "part_number": "XEX-1001-04", "serial": "XE-9001", "release": "DEMO-REL-7",
        "condition": "overhauled", "usage": USAGE, **changes})


@pytest.fixture
def removal(mechanic, db, clock):
    return Job(mechanic, db, clock, "exciter-removal")


def test_a_removal_records_the_fitted_serial_and_empties_the_position(removal, db, mechanic):
    removed = fitted(db)
    removal.walk_to("removed-exciter")
    removal.ok(removal_of(db))
    position = engines.current(db, DEMO_101_ENGINE_1).position("exciter", "A")
    assert position.fitted is None and position.emptied.job_id == removal.id
    engine = mechanic.get("/api/fleet").get_json()["aircraft"][0]["engines"][0]
    serials = [c["serial"] for c in engine["components"] if c["kind"] == "exciter"]
    assert removed.serial not in serials and len(serials) == 1  # channel B's only
    page = mechanic.get(f"/fleet/engines/{DEMO_101_ENGINE_1}").get_data(as_text=True)
    assert f"removed in job {removal.id}" in page and removed.serial in page


def test_a_serial_that_is_not_fitted_needs_a_finding_before_anything_else(removal, db):
    removal.walk_to("removed-exciter")
    answer = removal.ok(removal_of(db, serial="XE-7777")).get_json()
    assert answer["data"]["verdict"] == "mismatch"
    assert removal.state()["awaiting_finding"] == ["removed-exciter"]
    removal.refused(_event("performer", "signed", pin="135790"), "out_of_order")
    removal.ok(_event("removed-exciter", "finding", text="Data plate reads XE-7777; the "
                      "fleet record said otherwise", disposition="re-tested"))
    assert removal.state()["next_step"] == "performer"


def test_an_installation_refuses_a_wrong_part_number_and_a_serial_fitted_elsewhere(
        removal, db, mechanic, clock):
    removal.walk_to("removed-exciter")
    removal.ok(removal_of(db))
    installation = Job(mechanic, db, clock, "exciter-installation")
    installation.walk_to("incoming-exciter")
    refused = installation.refused(fitting(part_number="XEX-3100-02"), "part_number_not_allowed")
    assert "XEX-1001-03" in refused["reason"] and "XEX-1001-04 (alternate)" in refused["reason"]
    elsewhere = fitted(db, "exciter", "B", engine=3)  # DEMO-102 engine 1
    refused = installation.refused(fitting(serial=elsewhere.serial), "serial_fitted_elsewhere")
    assert "DEMO-102 engine 1, channel B exciter" in refused["reason"]
    problem = installation.post(fitting(release=""))
    assert problem.status_code == 422 and problem.get_json()["problems"][0]["field"] == \
        "data.release"
    installation.ok(fitting())
    assert fitted(db).serial == "XE-9001"
    component = fleet_store.component_by_serial(db, "XEX-1001-04", "XE-9001")
    assert (component["engine_id"], component["channel"]) == (DEMO_101_ENGINE_1, "A")


def _release_and_gate(check):
    """The functional check's tag release (the mechanic's own tags) and gate."""
    check.walk_to("release-tags")
    for tag in ("T-1", "T-2"):
        check.ok(_event("release-tags", "tag_removed", tag=tag))
    check.ok(_event("release-tags"))
    check.walk_to("run-a-dc")


def test_energising_is_refused_while_another_job_has_the_channel_open(removal, mechanic, db,
                                                                       clock):
    removal.walk_to("discharge")  # tags hung, the exciter's input disconnected
    check = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    _release_and_gate(check)
    clock.advance(1500)
    refused = check.refused(_event("run-a-dc", "energised"), "channel_disturbed")
    assert f"job {removal.id}, step disconnect-input" in refused["reason"]
    assert "Channel A: low-voltage input disconnected" in refused["reason"]  # as written
    assert "low-voltage input disconnected" in refused["reason"]
    page = mechanic.get(f"/jobs/{check.id}").get_data(as_text=True)
    assert 'data-testid="channel-not-whole-A"' in page


def test_the_duty_cycle_clock_carries_from_one_job_to_the_next(mechanic, db, clock):
    first = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    first.walk_to("run-a-dc")
    clock.advance(1500)
    first.ok(_event("run-a-dc", "energised"))
    clock.advance(60)
    first.ok(_event(None, "de_energised", channel="A"))
    # A second job on the same engine a minute later: channel A's exciter is still cooling
    # (demo duty cycle, invented: on 2 min, then off 3 min).
    second = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    second.walk_to("run-a-dc")
    clock.advance(60)
    refused = second.refused(_event("run-a-dc", "energised"), "duty_cycle_off")
    assert refused["seconds_remaining"] == 120  # off 60 s of the 180 s
    clock.advance(refused["seconds_remaining"])
    second.ok(_event("run-a-dc", "energised"))


def test_the_kept_engine_state_equals_a_replay_after_random_work(mechanic, db, clock):
    rng = random.Random(9)
    procedures = ["exciter-removal", "exciter-installation", "igniter-plug-replacement",
                  "ignition-lead-inspection"]
    for _ in range(6):
        job = Job(mechanic, db, clock, rng.choice(procedures), channel=rng.choice("AB"))
        steps = [s["id"] for s in job.state()["steps"] if s["kind"] != "sign"]
        try:
            job.walk_to(steps[rng.randrange(len(steps))])
        except AssertionError:
            pass  # the walk met a refusal (a part not fitted, a tag in use): that is work too
        assert engines.current(db, DEMO_101_ENGINE_1) == engines.replay(db, DEMO_101_ENGINE_1)
        clock.advance(rng.randrange(30, 900))
