"""The engine's state as a fold over the events of all its jobs: parts, connections, clocks."""

from __future__ import annotations

import random
from datetime import UTC, datetime, timedelta

import pytest

from webapp.domain import gates
from webapp.domain.engine import (
    EngineState,
    apply_engine_event,
    check_channels_whole,
    engine_state,
    starting_state,
    state_as_data,
    state_of,
)
from webapp.domain.errors import RuleRefusal

T0 = datetime(2026, 12, 1, 8, 0, tzinfo=UTC)
START = [
    {"kind": k, "channel": c, "part_number": pn, "serial": f"{k[:2].upper()}-{c}", "type": t}
    for c in ("A", "B")
    for k, pn, t in (("exciter", "XEX-1001-03", "dc"), ("lead", f"XHL-330-{c}", "ht-lead"),
                     ("plug", "XIP-2207", "surface-discharge"))
]
CONNECTIONS = ["input", "lead_at_exciter", "lead_at_plug"]
# Demo duty cycle (invented demo data): on 2 min, off 3 min, on 2 min, off 23 min.
DUTY = [[120.0, 180.0], [120.0, 1380.0]]


def event(job_id, effects, at=0, step="s", n=[0]):  # noqa: B006 - a counter for ids
    n[0] += 1
    return {"id": f"e{n[0]}", "job_id": job_id, "step_id": step, "kind": "x",
            "received_at": (T0 + timedelta(seconds=at)).isoformat(), "device_time": None,
            "data": {"engine": effects}}


def remove(kind, channel, serial, status="unserviceable"):
    return {"effect": "remove", "kind": kind, "channel": channel, "part_number": "P",
            "serial": serial, "status": status, "reason": "failed", "tag": "U-1",
            "usage": {"engine_hours": 812.0, "starts": 760}}


def install(kind, channel, serial, part_number="XEX-1001-04"):
    return {"effect": "install", "kind": kind, "channel": channel, "part_number": part_number,
            "serial": serial, "type": "dc", "release": "REL-1", "condition": "new",
            "usage": {"engine_hours": 812.0, "starts": 760}}


def test_the_starting_configuration_is_whole():
    state = starting_state(START)
    assert state.fitted("exciter", "A").serial == "EX-A"
    assert state.not_whole("A") == [] and state.not_whole("B") == []
    check_channels_whole(state, ["A", "B"])


def test_a_removed_exciter_leaves_its_position_empty_with_the_job_and_step_that_emptied_it():
    state = engine_state(starting_state(START), [
        event(7, [remove("exciter", "B", "EX-B")], step="removed-exciter")])
    position = state.position("exciter", "B")
    assert position.fitted is None
    assert (position.emptied.job_id, position.emptied.step_id) == (7, "removed-exciter")
    assert state.removed[0].serial == "EX-B" and state.removed[0].status == "unserviceable"
    with pytest.raises(RuleRefusal) as refused:
        check_channels_whole(state, ["A", "B"])
    assert refused.value.rule == "channel_disturbed"
    assert "job 7" in refused.value.reason and "removed-exciter" in refused.value.reason
    check_channels_whole(state, ["A"])  # the other channel is untouched


def test_a_connection_opened_in_one_job_stays_open_until_any_job_restores_it():
    state = engine_state(starting_state(START), [
        event(3, [{"effect": "disturb", "what": "input", "channel": "A"}], step="disconnect"),
        event(3, [{"effect": "disturb", "what": "lead_at_plug", "channel": "A"}], step="leads")])
    assert len(state.not_whole("A")) == 2
    assert "job 3, step disconnect" in state.not_whole("A")[0]
    state = apply_engine_event(state, event(9, [{"effect": "restore", "what": "lead_at_plug",
                                                 "channel": "A"}]))
    state = apply_engine_event(state, event(9, [{"effect": "restore", "what": "input",
                                                 "channel": "A"}]))
    assert state.not_whole("A") == []


def test_putting_back_one_end_of_a_lead_does_not_close_the_other_end():
    # Two jobs on channel A: an exciter change has the lead off the exciter, a plug change has
    # it off the plug. Reconnecting at the exciter leaves the plug end open.
    state = engine_state(starting_state(START), [
        event(1, [{"effect": "disturb", "what": "lead_at_exciter", "channel": "A"}]),
        event(2, [{"effect": "disturb", "what": "lead_at_plug", "channel": "A"}]),
        event(1, [{"effect": "restore", "what": "lead_at_exciter", "channel": "A"}])])
    assert state.not_whole("A") == [
        "high-tension lead disconnected at the plug in job 2, step s"]


def test_an_installed_part_fills_the_position_and_names_its_job():
    state = engine_state(starting_state(START), [
        event(7, [remove("exciter", "A", "EX-A")]),
        event(8, [install("exciter", "A", "EX-NEW")], step="incoming-exciter")])
    fitted = state.fitted("exciter", "A")
    assert (fitted.serial, fitted.job_id, fitted.release) == ("EX-NEW", 8, "REL-1")
    assert state.not_whole("A") == []


def test_the_duty_cycle_clock_belongs_to_the_exciter_serial_across_jobs():
    energise = [{"effect": "energise", "channel": "A", "duty": DUTY}]
    state = engine_state(starting_state(START), [
        event(1, energise, at=0), event(1, [{"effect": "de_energise", "channel": "A"}], at=100)])
    # A second job on the same engine 60 s later: the same exciter's off time still runs.
    now = T0 + timedelta(seconds=160)
    with pytest.raises(RuleRefusal) as refused:
        gates.check_energise({"A": state.clock_for("A")}, ["A"], now, None)
    assert refused.value.rule == "duty_cycle_off"
    assert refused.value.details["seconds_remaining"] == 120  # 180 s off from t = 100 s
    # A new exciter in the position has its own (cold) clock.
    swapped = engine_state(state, [event(2, [remove("exciter", "A", "EX-A")], at=120),
                                   event(2, [install("exciter", "A", "EX-NEW")], at=130)])
    gates.check_energise({"A": swapped.clock_for("A")}, ["A"], now, None)
    # Refitted, the first exciter's clock goes on where it stopped.
    back = engine_state(swapped, [event(2, [remove("exciter", "A", "EX-NEW")], at=140),
                                  event(2, [install("exciter", "A", "EX-A")], at=150)])
    assert back.clock_for("A").off_since is not None and back.clock_for("A").runs == 1


def test_de_energising_without_a_channel_switches_every_running_exciter_off():
    state = engine_state(starting_state(START), [
        event(1, [{"effect": "energise", "channel": c, "duty": DUTY} for c in "AB"], at=0),
        event(1, [{"effect": "de_energise", "channel": c} for c in "AB"], at=60)])
    assert not state.clock_for("A").is_on and not state.clock_for("B").is_on


def test_an_event_without_effects_changes_nothing():
    state = starting_state(START)
    assert apply_engine_event(state, {**event(1, []), "data": {"text": "x"}}) == state


def _random_effects(rng: random.Random) -> list[dict]:
    channel = rng.choice("AB")
    kind = rng.choice(["exciter", "lead", "plug"])
    choice = rng.randrange(7)
    if choice == 0:
        return [remove(kind, channel, f"S{rng.randrange(5)}")]
    if choice == 1:
        return [install(kind, channel, f"S{rng.randrange(5)}")]
    if choice == 2:
        return [{"effect": "disturb", "what": rng.choice(CONNECTIONS), "channel": channel}]
    if choice == 3:
        return [{"effect": "restore", "what": rng.choice(CONNECTIONS), "channel": channel}]
    if choice == 4:
        return [{"effect": "energise", "channel": channel, "duty": DUTY}]
    if choice == 5:
        return [{"effect": "de_energise", "channel": channel}]
    return [{"effect": "defer", "text": "chafed lead", "reference": "DD-1", "limit": "10 FH"}]


def _random_tag_event(rng: random.Random, at: int) -> dict:
    kind = rng.choice(["breaker_tagged", "breaker_tagged", "tag_handed_over",
                       "tag_taken_over", "tag_removed"])
    data = {"tag": f"T-{rng.randrange(4)}", "breaker": rng.choice(["IGN-A", "IGN-B"])}
    if kind == "tag_handed_over":
        data["to"] = rng.randrange(1, 4)
    if kind == "breaker_tagged" and rng.random() < 0.3:
        data["confirmed_existing"] = True
    return {**event(rng.randrange(1, 4), [], at=at), "kind": kind, "data": data,
            "person_id": rng.randrange(1, 4)}


@pytest.mark.parametrize("seed", range(20))
def test_the_kept_json_equals_the_fold_after_any_sequence(seed):
    rng = random.Random(seed)
    state: EngineState = starting_state(START)
    events = [event(rng.randrange(1, 4), _random_effects(rng), at=i * 30)
              if rng.random() < 0.7 else _random_tag_event(rng, i * 30) for i in range(80)]
    assert any(e["kind"] != "x" for e in events)
    for e in events:  # kept as JSON and read back before every event, as the store does
        state = apply_engine_event(state_of(state_as_data(state)), e)
    assert state == engine_state(starting_state(START), events)
    assert state.tags == gates.engine_tags(e for e in events if e["kind"] != "x")
