"""Part steps: typed fields checked against what the engine has fitted and may take."""

from __future__ import annotations

import pytest

from webapp.domain.engine import engine_state, starting_state
from webapp.domain.errors import RuleRefusal
from webapp.domain.parts import AllowedPart, Whereabouts, evaluate_part
from webapp.domain.procedures import PartChange
from webapp.domain.readings import InputProblem

START = [{"kind": "exciter", "channel": c, "part_number": "XEX-1001-03", "serial": f"XE-{c}",
          "type": "dc"} for c in "AB"]
ALLOWED = (AllowedPart("exciter", None, "XEX-1001-03", "dc", "approved"),
           AllowedPart("exciter", None, "XEX-1001-04", "dc", "alternate"))
REMOVE = PartChange(id="removed-exciter", kind="part", action="remove", part="exciter",
                    text="Record the exciter removed.")
INSTALL = PartChange(id="incoming-exciter", kind="part", action="install", part="exciter",
                     text="Record the incoming exciter.")
USAGE = {"engine_hours": "812.5", "starts": "760"}


def removal(**changes):
    return {"part_number": "XEX-1001-03", "serial": "XE-B", "status": "unserviceable",
            "reason": "failed", "tag": "U-0042", "usage": USAGE, **changes}


def fitting(**changes):
    return {"part_number": "XEX-1001-04", "serial": "XE-9001", "release": "DEMO-REL-7",
            "condition": "overhauled", "usage": USAGE, **changes}


def emptied(channel="B"):
    removed = evaluate_part(REMOVE, removal(serial=f"XE-{channel}"), channel,
                            starting_state(START), ALLOWED, Whereabouts())
    event = {"id": "e1", "job_id": 5, "step_id": REMOVE.id,
             "received_at": "2026-12-01T08:00:00+00:00", "data": removed}
    return engine_state(starting_state(START), [event])


def test_removing_the_fitted_serial_matches_and_empties_the_position():
    stored = evaluate_part(REMOVE, removal(), "B", starting_state(START), ALLOWED, Whereabouts())
    assert stored["verdict"] == "matches"
    assert stored["usage"] == {"engine_hours": 812.5, "starts": 760}
    assert stored["engine"][0]["effect"] == "remove"
    assert emptied().fitted("exciter", "B") is None


def test_a_serial_that_is_not_the_fitted_one_is_kept_as_a_mismatch_needing_a_finding():
    stored = evaluate_part(REMOVE, removal(serial="XE-7777"), "B", starting_state(START),
                           ALLOWED, Whereabouts())
    assert stored["verdict"] == "mismatch"
    assert stored["expected"] == {"part_number": "XEX-1001-03", "serial": "XE-B"}


def test_nothing_comes_off_an_empty_position():
    with pytest.raises(RuleRefusal) as refused:
        evaluate_part(REMOVE, removal(), "B", emptied(), ALLOWED, Whereabouts())
    assert refused.value.rule == "position_empty" and "job 5" in refused.value.reason


def test_an_alternate_part_number_goes_on_an_empty_position():
    stored = evaluate_part(INSTALL, fitting(), "B", emptied(), ALLOWED, Whereabouts())
    assert stored["interchangeability"] == "alternate" and stored["type"] == "dc"
    assert stored["engine"][0]["serial"] == "XE-9001"


def test_a_part_number_the_position_may_not_take_is_refused_with_the_allowed_list():
    with pytest.raises(RuleRefusal) as refused:
        evaluate_part(INSTALL, fitting(part_number="XEX-3100-02"), "B", emptied(), ALLOWED,
                      Whereabouts())
    assert refused.value.rule == "part_number_not_allowed"
    assert "XEX-1001-03, XEX-1001-04 (alternate)" in refused.value.reason


def test_a_serial_fitted_elsewhere_is_refused_with_where_it_is():
    where = Whereabouts(fitted_at="DEMO-102 engine 2, channel A exciter (XEX-1001-04)")
    with pytest.raises(RuleRefusal) as refused:
        evaluate_part(INSTALL, fitting(), "B", emptied(), ALLOWED, where)
    assert refused.value.rule == "serial_fitted_elsewhere"
    assert "DEMO-102 engine 2" in refused.value.reason


def test_nothing_goes_on_a_position_still_fitted():
    with pytest.raises(RuleRefusal) as refused:
        evaluate_part(INSTALL, fitting(), "B", starting_state(START), ALLOWED, Whereabouts())
    assert refused.value.rule == "position_fitted"


def test_a_part_removed_unserviceable_goes_back_only_after_repair_or_overhaul():
    where = Whereabouts(last_removal_status="unserviceable", last_removal_job=5)
    with pytest.raises(RuleRefusal) as refused:
        evaluate_part(INSTALL, fitting(condition="serviceable used"), "B", emptied(), ALLOWED,
                      where)
    assert refused.value.rule == "part_unserviceable"
    evaluate_part(INSTALL, fitting(condition="overhauled"), "B", emptied(), ALLOWED, where)


@pytest.mark.parametrize(("field", "data"), [
    ("release", fitting(release="  ")),
    ("condition", fitting(condition="like new")),
    ("serial", fitting(serial="")),
    ("serial", fitting(serial="X" * 61)),
    ("part_number", fitting(part_number="XEX\n1001")),
    ("engine_hours", fitting(usage={"starts": "3"})),
    ("engine_hours", fitting(usage={"engine_hours": "nan", "starts": "3"})),
    ("starts", fitting(usage={"engine_hours": "3", "starts": "2.5"})),
    ("engine_hours", fitting(usage="812")),
])
def test_fields_that_cannot_be_right_name_the_field(field, data):
    with pytest.raises(InputProblem) as problem:
        evaluate_part(INSTALL, data, "B", emptied(), ALLOWED, Whereabouts())
    assert problem.value.field == field


@pytest.mark.parametrize(("field", "data"), [
    ("status", removal(status="scrap")),
    ("reason", removal(reason="bored")),
    ("tag", removal(tag=None)),
])
def test_a_removal_needs_its_status_reason_and_tag(field, data):
    with pytest.raises(InputProblem) as problem:
        evaluate_part(REMOVE, data, "B", starting_state(START), ALLOWED, Whereabouts())
    assert problem.value.field == field
