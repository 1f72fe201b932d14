"""A job's state from its event log (the rules an event must pass are in `checks`).

The station never stores "step 4 is done" anywhere but in events; everything a
screen, the API or a record shows about a job is derived here, the same way
every time, from the pinned procedure revision and the events in order (a fold:
`apply_event` takes one more event, `job_state` takes the whole log).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from datetime import datetime
from functools import cached_property
from typing import Any, Literal

from . import gates, isolation, placement, torque
from .errors import RuleRefusal
from .gates import ChannelClock, PowerOff
from .procedures import (
    Advisory,
    Check,
    DischargeWait,
    IgnitionRun,
    Procedure,
    Sign,
    Step,
    Torque,
    advisories_for,
)

# Events a client may send, and the one the station writes itself when a job opens.
CLIENT_EVENT_KINDS = ("acknowledged", "step_done", "breaker_tagged", "tag_taken_over",
                      "tag_removed", "tag_handed_over", "tag_transfer_authorised",
                      "tag_removal_authorised", "input_reconnected", "energised", "de_energised",
                      "reading_recorded", "finding", "count_started", "sparks_counted",
                      "part_recorded", "signed", "returned", "amendment", "item_closed",
                      "lead_grounded")
STATION_EVENT_KINDS = ("job_opened",)
EVENT_KINDS = STATION_EVENT_KINDS + CLIENT_EVENT_KINDS

# The event that completes each step kind this station can record today. The
# other kinds (readings, signatures) arrive with their own rules; until then a
# job waits at such a step rather than pretending it was done.
COMPLETING_EVENT = {
    "warning": "acknowledged",
    "caution": "acknowledged",
    "note": "step_done",
    "check": "step_done",
    "lockout": "step_done",
    "discharge_wait": "step_done",
    "ignition_run": "energised",
    "reading": "reading_recorded",   # unless out of limits: then a finding completes it
    "torque": "reading_recorded",
    "spark_count": "sparks_counted",
    "part": "part_recorded",              # unless it does not match the engine: then a finding
    "sign": "signed",
}
# Events that happen within the current step without completing it.
IN_STEP_EVENTS = {"breaker_tagged": "lockout", "tag_removed": "lockout",
                  "tag_removal_authorised": "lockout", "count_started": "spark_count",
                  "finding": ("reading", "torque", "spark_count", "part")}
# Verdicts a finding must answer before the job goes on.
NEEDS_FINDING = ("out of limits", "mismatch")
# Events allowed whatever step the job is at. De-energising is never held back.
ANYTIME_EVENTS = ("tag_taken_over", "tag_handed_over", "tag_transfer_authorised",
                  "input_reconnected", "de_energised", "returned", "item_closed",
                  "lead_grounded")
# Events that are no work on the job: who sends only these did not perform it.
NOT_WORK = ("job_opened", "signed", "returned", "amendment", *gates.CONSENT_KINDS)

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
    """The facts a job's events establish; step statuses are worked out from them."""

    procedure: Procedure
    configuration: Configuration
    applicable: tuple[Step, ...]
    completed: Mapping[str, Mapping[str, Any]] = field(default_factory=dict)
    power_off: PowerOff | None = None
    clocks: Mapping[str, ChannelClock] = field(default_factory=dict)
    readings: tuple[Mapping[str, Any], ...] = ()   # every attempt, in order, findings attached
    awaiting_finding: Mapping[str, Mapping[str, Any]] = field(default_factory=dict)
    returns: tuple[Mapping[str, Any], ...] = ()   # supervisors' returns, with their reasons
    amendments: tuple[Mapping[str, Any], ...] = ()  # corrections after certification
    revision: str = ""   # the SHA-256 of the procedure revision the job pinned
    # When each spark count step's window (or tapping) was started, by both clocks: the
    # station times the window; a count uses its start up.
    count_windows: Mapping[str, PowerOff] = field(default_factory=dict)
    workers: frozenset[int] = frozenset()  # everyone who recorded work (not only a signature)
    # When the high-tension lead was last grounded (its grounding step, or grounded again
    # after a pause), by both clocks; None until then and after the input is reconnected.
    lead_grounded: PowerOff | None = None

    @property
    def isolation_verified(self) -> bool:
        """Whether an isolation check of this job stands done with a verified result (a
        reading out of limits, or deferred, does not verify; reconnecting the input undoes
        it)."""
        return any(isolation.is_isolation_check(step)
                   and self.completed[step.id].get("kind") == "reading_recorded"
                   and self.completed[step.id]["data"].get("verdict")
                   == isolation.ISOLATION_VERIFIED
                   for step in self.applicable if step.id in self.completed)

    @cached_property
    def positions(self) -> dict[str, int]:
        return {step.id: i for i, step in enumerate(self.applicable)}

    @cached_property
    def _next_position(self) -> int | None:
        return next((i for i, step in enumerate(self.applicable)
                     if step.id not in self.completed), None)

    def _progress(self, position: int) -> StepProgress:
        step = self.applicable[position]
        event = self.completed.get(step.id)
        status: StepStatus = ("done" if event is not None
                              else "next" if position == self._next_position else "waiting")
        return StepProgress(position + 1, step, status, event, step.kind in COMPLETING_EVENT)

    @cached_property
    def steps(self) -> tuple[StepProgress, ...]:
        return tuple(self._progress(i) for i in range(len(self.applicable)))

    @property
    def status(self) -> Literal["open", "complete"]:
        return "complete" if len(self.completed) == len(self.applicable) else "open"

    @property
    def next_step(self) -> StepProgress | None:
        position = self._next_position
        return None if position is None else self._progress(position)

    @property
    def done_count(self) -> int:
        return len(self.completed)

    def step(self, step_id: str) -> StepProgress | None:
        position = self.positions.get(step_id)
        return None if position is None else self._progress(position)

    def advisories_for(self, step_id: str) -> list[Advisory]:
        return advisories_for(list(self.applicable), step_id)

    def single_channel_rates(self, mode: str | None = None) -> dict[str, tuple[float, float]]:
        """The latest spark rate (and its resolution) counted on channel A and on B alone, in
        a combination unit's `mode` (or with no mode): counts of one mode are compared only
        with counts of the same mode."""
        rates: dict[str, tuple[float, float]] = {}
        for r in self.readings:
            if r["kind"] == "spark_count" and r.get("channel") in ("A", "B") \
                    and r.get("mode") == mode:
                rates[r["channel"]] = (r["rate"], r.get("resolution", 0.0))
        return rates

    def open_gate_steps(self) -> list[str]:
        """The pre-energising confirmations not yet done ("step n (id)")."""
        return [f"step {i + 1} ({step.id})" for i, step in enumerate(self.applicable)
                if isinstance(step, Check) and step.before_energising
                and step.id not in self.completed]


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
    _refuse_mixed_types(procedure, at_work, exciters)
    return Configuration(channel=channel, exciter_types=exciters, plug_types=plugs,
                         components=tuple(at_work))


def _refuse_mixed_types(procedure: Procedure, at_work: list[Mapping[str, Any]],
                        exciters: tuple[str, ...]) -> None:
    """A step's `when` asks what is installed on the engine as a whole; with a different
    exciter type on each channel a step written for one type would also be asked of the
    other's channel. Such a fit needs the approved data for it, not a guess."""
    if len(exciters) < 2:
        return
    types = [s.when.exciter_types for s in procedure.steps
             if s.when is not None and s.when.exciter_types is not None]
    if any(set(t) & set(exciters) != set(exciters) for t in types):
        fitted = ", ".join(f"channel {c['channel']} {c['type']}" for c in
                           sorted(at_work, key=lambda c: c["channel"]) if c["kind"] == "exciter")
        raise RuleRefusal("mixed_exciter_types", f"The exciters fitted differ in type "
                          f"({fitted}) and '{procedure.title}' has steps for one type only: "
                          "work to the approved data for this fit, not to this procedure.")


def _times(event: Mapping[str, Any]) -> PowerOff:
    """When the event's moment was, by the station's clock (placed, for an entry that waited
    on a tablet: domain/placement.py) and by the device's."""
    received = datetime.fromisoformat(event["received_at"])
    device = placement.parse(event.get("device_time"))
    made = placement.made_at(received, device, placement.parse(event.get("device_sent")))
    return PowerOff(made, device, by_count=made != received)


def run_channels(step: IgnitionRun) -> tuple[str, ...]:
    return ("A", "B") if step.channel == "both" else (step.channel,)


def opened_state(procedure: Procedure, opened: Mapping[str, Any]) -> JobState:
    if opened["kind"] != "job_opened":
        raise ValueError("a job's event log starts with job_opened")
    configuration = Configuration.from_data(opened["data"])
    steps = procedure.steps_for(configuration.exciter_types, configuration.plug_types)
    return JobState(procedure, configuration, tuple(steps),
                    revision=str(opened["data"].get("revision", "")))


def job_state(procedure: Procedure, events: Sequence[Mapping[str, Any]]) -> JobState:
    """Derive a job's state from its events (the first is always `job_opened`)."""
    if not events:
        raise ValueError("a job's event log starts with job_opened")
    state = opened_state(procedure, events[0])
    for event in events[1:]:
        state = apply_event(state, event)
    return state


def apply_event(state: JobState, event: Mapping[str, Any]) -> JobState:
    """The state after one more stored event (the same as rebuilding from the whole log)."""
    kind, step_id = event["kind"], event["step_id"]
    worker = None if kind in NOT_WORK else event.get("person_id")
    if worker is not None and worker not in state.workers:
        state = replace(state, workers=state.workers | {worker})
    position = state.positions.get(step_id) if step_id else None
    step = state.applicable[position] if position is not None else None
    if kind == "input_reconnected":
        # Power is back: the disconnection and every discharge wait must be done again.
        completed = {k: v for k, v in state.completed.items()
                     if not _restarts_with_power(_step_of(state, k))}
        return replace(state, completed=completed, power_off=None, lead_grounded=None)
    if kind == "lead_grounded":
        return replace(state, lead_grounded=_times(event))
    if kind == "de_energised":
        return replace(state, clocks=_switched_off(state.clocks, event,
                                                   event["data"].get("channel")))
    if kind == "amendment":
        return replace(state, amendments=(*state.amendments, event))
    if kind == "returned":
        # The job reopens for its signatures, and from the step to repeat when the supervisor
        # named one (every step after it is done again, in order, gates and all). The work
        # recorded stays in the log, every attempt with it.
        again = state.positions.get(event["data"].get("repeat_from") or "", len(state.applicable))
        completed = {k: v for k, v in state.completed.items()
                     if not isinstance(_step_of(state, k), Sign) and state.positions[k] < again}
        return replace(state, completed=completed, returns=(*state.returns, event))
    if kind == "count_started" and step is not None:
        return replace(state, count_windows={**state.count_windows, step.id: _times(event)})
    if kind == "sparks_counted" and step is not None:
        state = replace(state, count_windows={k: v for k, v in state.count_windows.items()
                                              if k != step.id})
    if kind in ("reading_recorded", "sparks_counted", "part_recorded") and step is not None:
        return _with_reading(state, step, event)
    if kind == "finding" and step is not None:
        return _with_finding(state, step, event)
    if step is None or kind != COMPLETING_EVENT.get(step.kind):
        return state
    completed = {**state.completed, step.id: event}
    power_off, clocks = state.power_off, state.clocks
    if isinstance(step, IgnitionRun):
        clocks = dict(clocks)
        periods = gates.duty_periods(step.duty_cycle)
        for channel in run_channels(step):
            clock = clocks.get(channel, ChannelClock())
            if not clock.is_on:
                clocks[channel] = clock.energised(_times(event), periods)
    elif isinstance(step, Check):
        if step.power == "removed":
            power_off = _times(event)
        elif step.power == "restored":
            power_off = None
        if step.ignition_off:
            clocks = _switched_off(clocks, event, None)
        if step.grounds_lead:
            state = replace(state, lead_grounded=_times(event))
    return replace(state, completed=completed, power_off=power_off, clocks=clocks)


def _reading_entry(step: Step, event: Mapping[str, Any], attempt: int) -> dict[str, Any]:
    return {"step": step.id, "kind": step.kind, "attempt": attempt, "event": event["id"],
            "person_id": event["person_id"], "received_at": event["received_at"],
            **event["data"], "finding": None}


def _with_reading(state: JobState, step: Step, event: Mapping[str, Any]) -> JobState:
    attempt = 1 + sum(1 for r in state.readings if r["step"] == step.id)
    readings = (*state.readings, _reading_entry(step, event, attempt))
    if event["data"].get("verdict") in NEEDS_FINDING:
        return replace(state, readings=readings,
                       awaiting_finding={**state.awaiting_finding, step.id: event})
    if not _all_fasteners_done(step, readings):
        return replace(state, readings=readings)
    return replace(state, readings=readings, completed={**state.completed, step.id: event})


def _all_fasteners_done(step: Step, readings: tuple[Mapping[str, Any], ...]) -> bool:
    """A torque step that names its fasteners is done when each has a reading that stands."""
    return (not isinstance(step, Torque) or not step.fasteners
            or torque.accepted_fasteners(step, readings) >= set(step.fasteners))


def _with_finding(state: JobState, step: Step, event: Mapping[str, Any]) -> JobState:
    readings = list(state.readings)
    for i in range(len(readings) - 1, -1, -1):
        if readings[i]["step"] == step.id:
            readings[i] = {**readings[i], "finding": {**event["data"],
                                                      "person_id": event["person_id"],
                                                      "received_at": event["received_at"]}}
            break
    waiting = {k: v for k, v in state.awaiting_finding.items() if k != step.id}
    completed = dict(state.completed)
    if ((event["data"].get("disposition") == "deferred" or step.kind == "part")
            and _all_fasteners_done(step, tuple(readings))):
        # A deferral, or a part that did not match, is on the record with its finding; a
        # reading replaced, repaired or re-tested waits for the new reading of the step (a
        # torque step's other fasteners wait for theirs).
        completed[step.id] = event
    return replace(state, readings=tuple(readings), awaiting_finding=waiting,
                   completed=completed)


def _switched_off(clocks: Mapping[str, ChannelClock], event: Mapping[str, Any],
                  channel: str | None) -> dict[str, ChannelClock]:
    return {c: (clock.de_energised(_times(event))
                if clock.is_on and channel in (None, c) else clock)
            for c, clock in clocks.items()}


def _step_of(state: JobState, step_id: str) -> Step | None:
    return next((s for s in state.applicable if s.id == step_id), None)


def _restarts_with_power(step: Step | None) -> bool:
    """Steps done again once the input was reconnected: the disconnection, the wait and the
    isolation check (the lead is grounded again too: `lead_grounded` is cleared)."""
    return step is not None and (
        isinstance(step, DischargeWait) or isolation.is_isolation_check(step)
        or (isinstance(step, Check) and step.power == "removed"))
