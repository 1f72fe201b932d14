"""A job's state from its event log, and the rules an incoming event must pass.

The station never stores "step 4 is done" anywhere but in events; everything a
screen, the API or a record shows about a job is derived here, the same way
every time, from the pinned procedure revision and the events in order.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any, Literal

from .errors import RuleRefusal
from .procedures import Advisory, Check, Procedure, Step, advisories_for

# Events a client may send, and the one the station writes itself when a job opens.
CLIENT_EVENT_KINDS = ("acknowledged", "step_done")
STATION_EVENT_KINDS = ("job_opened",)
EVENT_KINDS = STATION_EVENT_KINDS + CLIENT_EVENT_KINDS

# The event that completes each step kind this station can record today. The
# other kinds (gates, readings, signatures) arrive with their own rules; until
# then a job waits at such a step rather than pretending it was done.
COMPLETING_EVENT = {
    "warning": "acknowledged",
    "caution": "acknowledged",
    "note": "step_done",
    "check": "step_done",
}

StepStatus = Literal["done", "next", "waiting"]


@dataclass(frozen=True)
class Configuration:
    """What is installed where the job works: decides which steps apply."""

    channel: str | None
    exciter_types: tuple[str, ...]
    plug_types: tuple[str, ...]
    components: tuple[Mapping[str, Any], ...] = ()

    def as_data(self) -> dict[str, Any]:
        return {"channel": self.channel, "exciter_types": list(self.exciter_types),
                "plug_types": list(self.plug_types),
                "components": [dict(c) for c in self.components]}

    @classmethod
    def from_data(cls, data: Mapping[str, Any]) -> Configuration:
        return cls(channel=data["channel"], exciter_types=tuple(data["exciter_types"]),
                   plug_types=tuple(data["plug_types"]),
                   components=tuple(data.get("components", ())))


@dataclass(frozen=True)
class StepProgress:
    number: int
    step: Step
    status: StepStatus
    event: Mapping[str, Any] | None = None
    recordable: bool = True

    @property
    def id(self) -> str:
        return self.step.id


@dataclass(frozen=True)
class JobState:
    procedure: Procedure
    configuration: Configuration
    steps: tuple[StepProgress, ...]
    status: Literal["open", "complete"]
    readings: tuple[Mapping[str, Any], ...] = field(default=())

    @property
    def next_step(self) -> StepProgress | None:
        return next((s for s in self.steps if s.status == "next"), None)

    @property
    def done_count(self) -> int:
        return sum(1 for s in self.steps if s.status == "done")

    def step(self, step_id: str) -> StepProgress | None:
        return next((s for s in self.steps if s.id == step_id), None)

    def advisories_for(self, step_id: str) -> list[Advisory]:
        return advisories_for([s.step for s in self.steps], step_id)


def configuration_for(procedure: Procedure, engine_model: str,
                      components: Iterable[Mapping[str, Any]],
                      channel: str | None) -> Configuration:
    """Check that a procedure may be opened on an engine (and channel); say what applies.

    Raises RuleRefusal when the procedure's effectivity or channel rule does not fit.
    """
    if procedure.channel == "one" and channel not in ("A", "B"):
        raise RuleRefusal("channel_required", f"'{procedure.title}' is done on one ignition "
                          "channel: choose channel A or B.")
    if procedure.channel == "all" and channel is not None:
        raise RuleRefusal("channel_not_applicable", f"'{procedure.title}' covers both "
                          "ignition channels: open it without a channel.")
    at_work = [c for c in components if channel is None or c["channel"] == channel]
    exciters = tuple(sorted({c["type"] for c in at_work if c["kind"] == "exciter"}))
    plugs = tuple(sorted({c["type"] for c in at_work if c["kind"] == "plug"}))
    if not exciters or not plugs:
        where = f"channel {channel}" if channel else "this engine"
        raise RuleRefusal("configuration_unknown", f"No exciter or igniter plug is recorded as "
                          f"installed on {where}; the fleet record must be put right before "
                          "the procedure's effectivity can be checked.")
    if not procedure.applies_to(engine_model, exciters, plugs):
        raise RuleRefusal("not_effective", f"'{procedure.title}' does not apply to a "
                          f"{engine_model} with {'/'.join(exciters)} exciter and "
                          f"{'/'.join(plugs)} plugs (see its effectivity).")
    return Configuration(channel=channel, exciter_types=exciters, plug_types=plugs,
                         components=tuple(at_work))


def job_state(procedure: Procedure, events: Sequence[Mapping[str, Any]]) -> JobState:
    """Derive a job's state from its events (the first is always `job_opened`)."""
    if not events or events[0]["kind"] != "job_opened":
        raise ValueError("a job's event log starts with job_opened")
    configuration = Configuration.from_data(events[0]["data"])
    steps = procedure.steps_for(configuration.exciter_types, configuration.plug_types)
    completed = {e["step_id"]: e for e in events[1:]
                 if e["kind"] in CLIENT_EVENT_KINDS and e["step_id"] is not None}
    return _with_completed(procedure, configuration, steps, completed)


def apply_event(state: JobState, event: Mapping[str, Any]) -> JobState:
    """The state after one more (allowed) event: job_state(events + [event]), without the log."""
    if event["kind"] not in CLIENT_EVENT_KINDS or event["step_id"] is None:
        return state
    steps = list(state.steps)
    position = next((i for i, s in enumerate(steps) if s.id == event["step_id"]), None)
    if position is None:
        return state
    steps[position] = replace(steps[position], status="done", event=event)
    # The next step is the first one not done; every other step keeps its status.
    for i, s in enumerate(steps):
        if s.status == "next" and i != position:
            break
        if s.status == "waiting":
            steps[i] = replace(s, status="next")
            break
    status: Literal["open", "complete"] = (
        "open" if any(s.status != "done" for s in steps) else "complete")
    return replace(state, steps=tuple(steps), status=status)


def _with_completed(procedure: Procedure, configuration: Configuration, steps: Sequence[Step],
                    completed: Mapping[str, Mapping[str, Any]]) -> JobState:
    progress: list[StepProgress] = []
    next_found = False
    for number, step in enumerate(steps, start=1):
        recordable = step.kind in COMPLETING_EVENT
        if step.id in completed:
            status: StepStatus = "done"
        elif not next_found:
            status, next_found = "next", True
        else:
            status = "waiting"
        progress.append(StepProgress(number, step, status, completed.get(step.id), recordable))
    job_status: Literal["open", "complete"] = "open" if next_found else "complete"
    return JobState(procedure, configuration, tuple(progress), job_status)


def check_event(state: JobState, kind: str, step_id: str | None,
                data: Mapping[str, Any]) -> None:
    """Refuse an event the rules do not allow, with a reason a mechanic understands."""
    if kind not in CLIENT_EVENT_KINDS:
        raise RuleRefusal("unknown_event_kind", f"'{kind}' is not something this station "
                          "records; known: " + ", ".join(CLIENT_EVENT_KINDS) + ".")
    if state.status != "open":
        raise RuleRefusal("job_not_open", "This job is no longer open for work.")
    target = state.step(step_id) if step_id else None
    if target is None:
        raise RuleRefusal("unknown_step", f"Step '{step_id}' is not part of this job's "
                          "procedure for the installed configuration.")
    if target.status == "done":
        raise RuleRefusal("already_done", f"Step {target.number} is already done.")
    upcoming = state.next_step
    if upcoming is not None and upcoming.id != target.id:
        raise RuleRefusal("out_of_order", f"Step {upcoming.number} ('{_short(upcoming.step)}') "
                          f"comes first: steps are done in the procedure's order.",
                          next_step=upcoming.id)
    wanted = COMPLETING_EVENT.get(target.step.kind)
    if wanted is None:
        raise RuleRefusal("step_kind_not_available", f"This station cannot record "
                          f"'{target.step.kind}' steps yet. The job waits at step "
                          f"{target.number}; do not go on without the approved procedure.")
    if kind != wanted:
        verb = "acknowledged" if wanted == "acknowledged" else "marked done"
        raise RuleRefusal("wrong_event_for_step", f"A {target.step.kind} step is {verb}, "
                          f"not '{kind}'.")
    step = target.step
    if isinstance(step, Check) and step.items:
        ticked = data.get("items")
        if not isinstance(ticked, list) or sorted(set(ticked)) != list(range(len(step.items))):
            raise RuleRefusal("items_unconfirmed", f"Every item of step {target.number} must be "
                              "confirmed before it is done.", items=len(step.items))


def _short(step: Step) -> str:
    text = step.text.strip().splitlines()[0]
    return text if len(text) <= 60 else text[:57] + "..."
