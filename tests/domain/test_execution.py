"""A job's state from its events, and the order rules, without the station around them."""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path

import pytest

from webapp.domain.checks import Circumstances, check_event
from webapp.domain.errors import RuleRefusal
from webapp.domain.execution import apply_event, configuration_for, job_state
from webapp.domain.procedure_files import parse_procedure

TASKS = Path(__file__).resolve().parents[2] / "tasks"
REMOVAL = parse_procedure((TASKS / "exciter-removal.yaml").read_text(encoding="utf-8"))

DC_ENGINE = [
    {"kind": "exciter", "type": "dc", "channel": "A"},
    {"kind": "exciter", "type": "dc", "channel": "B"},
    {"kind": "plug", "type": "surface-discharge", "channel": "A"},
    {"kind": "plug", "type": "surface-discharge", "channel": "B"},
]


AT = Circumstances(now=datetime(2026, 12, 1, 8, 0, tzinfo=UTC), device_now=None, person_id=1,
                   job_id=1)


def _opened(configuration) -> dict:
    return {"kind": "job_opened", "step_id": None, "data": configuration.as_data()}


def _done(step_id: str, kind: str = "step_done") -> dict:
    return {"kind": kind, "step_id": step_id, "data": {},
            "received_at": "2026-12-01T08:00:00+00:00", "device_time": None}


def _state(*events):
    configuration = configuration_for(REMOVAL, "QT-610", DC_ENGINE, "A")
    return job_state(REMOVAL, [_opened(configuration), *events])


def test_new_job_waits_at_its_first_step():
    state = _state()
    assert state.status == "open"
    assert state.next_step.id == "identify" and state.done_count == 0
    assert [s.status for s in state.steps[:3]] == ["next", "waiting", "waiting"]


def test_done_steps_move_the_next_step_on():
    state = _state(_done("identify"), _done("selectors-off"))
    assert state.next_step.id == "lethal-energy-breakers"
    assert state.done_count == 2


def test_refused_out_of_order_names_the_step_that_comes_first():
    with pytest.raises(RuleRefusal) as refused:
        check_event(_state(), "step_done", "disconnect-input", {}, AT)
    assert refused.value.rule == "out_of_order"
    assert refused.value.details["next_step"] == "identify"
    assert "Step 1" in refused.value.reason


def test_warning_needs_acknowledgement_not_done():
    state = _state(_done("identify"), _done("selectors-off"))
    with pytest.raises(RuleRefusal, match="acknowledged") as refused:
        check_event(state, "step_done", "lethal-energy-breakers", {}, AT)
    assert refused.value.rule == "wrong_event_for_step"
    check_event(state, "acknowledged", "lethal-energy-breakers", {}, AT)  # allowed


def test_items_must_all_be_confirmed():
    state = _state(_done("identify"))
    for ticked in (None, [], [0, 1], [0, 1, 1], [0, 1, 5], "all"):
        with pytest.raises(RuleRefusal) as refused:
            check_event(state, "step_done", "selectors-off", {"items": ticked}, AT)
        assert refused.value.rule == "items_unconfirmed"
    check_event(state, "step_done", "selectors-off", {"items": [2, 0, 1]}, AT)


def test_steps_that_do_not_apply_are_not_part_of_the_job():
    with pytest.raises(RuleRefusal) as refused:
        check_event(_state(), "step_done", "ac-input-open", {}, AT)  # AC-only step, DC engine
    assert refused.value.rule == "unknown_step"


def test_configuration_is_taken_from_the_job_s_channel():
    mixed = [*DC_ENGINE[:1], {"kind": "exciter", "type": "ac", "channel": "B"}, *DC_ENGINE[2:]]
    assert configuration_for(REMOVAL, "QT-610", mixed, "A").exciter_types == ("dc",)
    assert configuration_for(REMOVAL, "QT-610", mixed, "B").exciter_types == ("ac",)


def test_a_both_channel_procedure_with_type_specific_steps_is_refused_on_a_mixed_fit():
    # A dc unit on A and a combination unit on B: the functional check's plain counts are for
    # dc units and its moded counts for combination units, each asked of both channels.
    check = parse_procedure((TASKS / "ignition-functional-check.yaml").read_text("utf-8"))
    mixed = [DC_ENGINE[0], {"kind": "exciter", "type": "combination", "channel": "B"},
             *DC_ENGINE[2:]]
    with pytest.raises(RuleRefusal) as refused:
        configuration_for(check, "QT-610", mixed, None)
    assert refused.value.rule == "mixed_exciter_types"
    assert "channel A dc, channel B combination" in refused.value.reason
    # The same units alike on both channels open as before.
    assert configuration_for(check, "QT-610", DC_ENGINE, None).exciter_types == ("dc",)


def test_configuration_refuses_missing_parts_and_other_engine_models():
    with pytest.raises(RuleRefusal) as missing:
        configuration_for(REMOVAL, "QT-610", DC_ENGINE[2:], "A")
    assert missing.value.rule == "configuration_unknown"
    with pytest.raises(RuleRefusal) as other_model:
        configuration_for(REMOVAL, "QT-999", DC_ENGINE, "A")
    assert other_model.value.rule == "not_effective"


def test_job_log_must_start_with_job_opened():
    with pytest.raises(ValueError):
        job_state(REMOVAL, [_done("identify")])


def test_applying_events_one_by_one_equals_rebuilding_from_the_log():
    import random

    configuration = configuration_for(REMOVAL, "QT-610", DC_ENGINE, "A")
    opened = _opened(configuration)
    ids = [s.id for s in job_state(REMOVAL, [opened]).steps]
    rng = random.Random(74)
    for _ in range(50):
        # In order, out of order, repeated: the fold must match the rebuild every time.
        order = rng.sample(ids, rng.randint(1, len(ids))) if rng.random() < 0.5 else ids[
            :rng.randint(1, len(ids))]
        events = [opened]
        state = job_state(REMOVAL, events)
        for step_id in order:
            event = _done(step_id)
            events.append(event)
            state = apply_event(state, event)
            assert state == job_state(REMOVAL, events)


def test_every_step_kind_is_recorded_by_its_own_event():
    from webapp.domain.execution import COMPLETING_EVENT
    from webapp.domain.procedures import STEP_KINDS

    assert set(COMPLETING_EVENT) == set(STEP_KINDS)


def test_a_signature_is_not_a_tick():
    # A sign step takes a signature (with the PIN, checked by the station), never "done".
    procedure = REMOVAL
    configuration = configuration_for(procedure, "QT-610", DC_ENGINE, "A")
    steps = procedure.steps_for(("dc",), ("surface-discharge",))
    kinds = {"warning": "acknowledged", "caution": "acknowledged", "reading": "reading_recorded",
             "part": "part_recorded"}
    done = []
    for step in steps[:-1]:
        event = _done(step.id, kinds.get(step.kind, "step_done"))
        event["id"] = step.id
        event["person_id"] = 1
        if step.kind in ("reading", "part"):
            event["data"] = {"text": "demo", "verdict": "recorded"}
        done.append(event)
    state = job_state(procedure, [_opened(configuration), *done])
    assert state.next_step.id == "performer"
    with pytest.raises(RuleRefusal) as refused:
        check_event(state, "step_done", "performer", {}, AT)
    assert refused.value.rule == "wrong_event_for_step"


def test_the_engine_s_tags_are_read_only_for_the_events_that_need_them():
    from webapp.domain.checks import needs_engine_tags

    state = _state()
    for kind in ("breaker_tagged", "tag_taken_over", "tag_removed", "energised"):
        assert needs_engine_tags(state, kind, None)
    assert needs_engine_tags(state, "step_done", "breakers")        # completing the lockout
    assert not needs_engine_tags(state, "step_done", "identify")
    assert not needs_engine_tags(state, "acknowledged", "lethal-energy-breakers")
    assert not needs_engine_tags(state, "part_recorded", "removed-exciter")
