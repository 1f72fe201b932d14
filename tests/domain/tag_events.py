"""Tag events and lockout steps for the domain tests of tag hand-overs and confirmations.

Every tag number, person, job and time here is invented.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest

from webapp.domain import gates
from webapp.domain.errors import RuleRefusal
from webapp.domain.procedure_files import parse_procedure
from webapp.domain.procedures import Lockout

TASKS = Path(__file__).resolve().parents[2] / "tasks"
FUNCTIONAL = parse_procedure(
    (TASKS / "ignition-functional-check.yaml").read_text(encoding="utf-8"))
INSTALLATION = parse_procedure(
    (TASKS / "exciter-installation.yaml").read_text(encoding="utf-8"))

T0 = datetime(2026, 12, 1, 18, 0, tzinfo=UTC)   # invented end of a shift
OWNER, INCOMING, THIRD, SUPER, CLERK = 2, 7, 8, 20, 30   # invented people
OWNER_JOB, JOB, OTHER_JOB = 11, 12, 13
ROLES = {OWNER: ("mechanic",), INCOMING: ("mechanic",), THIRD: ("mechanic",),
         SUPER: ("supervisor",), CLERK: ("trainer",)}

APPLY = Lockout.model_validate({
    "id": "breakers", "kind": "lockout", "text": "Tag both.",
    "breakers": [{"id": "IGN-A", "label": "IGNITION A"}, {"id": "IGN-B", "label": "IGNITION B"}]})
CONFIRM = APPLY.model_copy(update={"id": "breakers-held", "confirm_existing": True})
RELEASE = Lockout.model_validate({
    "id": "release-tags", "kind": "lockout", "action": "release", "text": "Untag.",
    "absent_owner": "Shop absent-owner procedure (demo)",
    "breakers": [{"id": "IGN-A", "label": "IGNITION A"}, {"id": "IGN-B", "label": "IGNITION B"}]})
RELEASE_OWNERS_ONLY = RELEASE.model_copy(update={"absent_owner": None})
RELEASE_A_ONLY = RELEASE.model_copy(update={"breakers": RELEASE.breakers[:1]})


def stamp(seconds: float) -> str:
    return (T0 + timedelta(seconds=seconds)).isoformat()


def event(kind: str, data: dict[str, Any], *, person: int, job: int, at_s: float,
          event_id: str = "", step_id: str | None = None) -> dict[str, Any]:
    return {"id": event_id or f"{kind}-{at_s}", "kind": kind, "step_id": step_id, "data": data,
            "person_id": person, "job_id": job, "received_at": stamp(at_s), "device_time": None}


def tagged(tag: str, breaker: str, *, person: int = OWNER, job: int = OWNER_JOB,
            at_s: float = 0) -> dict[str, Any]:
    return event("breaker_tagged", {"tag": tag, "breaker": breaker}, person=person, job=job,
                  at_s=at_s, step_id="breakers")


def handed(tag: str, to: int, *, at_s: float = 60, by: int = OWNER) -> dict[str, Any]:
    return event("tag_handed_over", {"tag": tag, "to": to}, person=by, job=JOB, at_s=at_s)


def taken(tag: str, *, person: int = INCOMING, job: int = JOB,
           at_s: float = 90) -> dict[str, Any]:
    return event("tag_taken_over", {"tag": tag, "breaker_confirmed_open": True},
                  person=person, job=job, at_s=at_s)


def authorised(kind: str, tag: str, *, to: int | None = None, job: int = JOB,
                at_s: float = 60) -> dict[str, Any]:
    data: dict[str, Any] = {"tag": tag, "reason": "Left site at 17:30; phoned twice"}
    if to is not None:
        data["to"] = to
    return event(kind, data, person=SUPER, job=job, at_s=at_s)


def refused(call, *args) -> RuleRefusal:
    with pytest.raises(RuleRefusal) as refused:
        call(*args)
    return refused.value


def replace_data(entry: dict[str, Any], **data: Any) -> dict[str, Any]:
    return {**entry, "data": {**entry["data"], **data}}


HUNG = [tagged("T-0101", "IGN-A"), tagged("T-0102", "IGN-B")]


def tags_with(*more: dict[str, Any]) -> dict[str, gates.Tag]:
    return gates.engine_tags([*HUNG, *more])


DC_ENGINE = [{"kind": "exciter", "type": "dc", "channel": c} for c in "AB"] + [
    {"kind": "plug", "type": "surface-discharge", "channel": c} for c in "AB"]
