"""A job's state from its event log, and the rules an incoming event must pass.

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

from . import gates, readings, release, signoff, tag_handover
from .authorisations import Authorisation
from .engine import EngineState, check_channels_whole
from .errors import RuleRefusal
from .gates import ChannelClock, PowerOff, Tag
from .parts import AllowedPart, Whereabouts, evaluate_part
from .procedures import (
    Advisory,
    Check,
    DischargeWait,
    IgnitionRun,
    Lockout,
    PartChange,
    Procedure,
    Reading,
    Sign,
    SparkCount,
    Step,
    Torque,
    advisories_for,
)

# Events a client may send, and the one the station writes itself when a job opens.
CLIENT_EVENT_KINDS = ("acknowledged", "step_done", "breaker_tagged", "tag_taken_over",
                      "tag_removed", "tag_handed_over", "tag_transfer_authorised",
                      "tag_removal_authorised", "input_reconnected", "energised", "de_energised",
                      "reading_recorded", "finding", "sparks_counted", "part_recorded", "signed",
                      "returned", "amendment", "item_closed")
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
                  "tag_removal_authorised": "lockout",
                  "finding": ("reading", "torque", "spark_count", "part")}
# Verdicts a finding must answer before the job goes on.
NEEDS_FINDING = ("out of limits", "mismatch")
# Events allowed whatever step the job is at. De-energising is never held back.
ANYTIME_EVENTS = ("tag_taken_over", "tag_handed_over", "tag_transfer_authorised",
                  "input_reconnected", "de_energised", "returned", "item_closed")
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
    workers: frozenset[int] = frozenset()  # everyone who recorded work (not only a signature)

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

    def single_channel_rates(self) -> dict[str, tuple[float, float]]:
        """The latest spark rate (and its resolution) counted on channel A and on B alone."""
        rates: dict[str, tuple[float, float]] = {}
        for r in self.readings:
            if r["kind"] == "spark_count" and r.get("channel") in ("A", "B"):
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
    return Configuration(channel=channel, exciter_types=exciters, plug_types=plugs,
                         components=tuple(at_work))


def _times(event: Mapping[str, Any]) -> PowerOff:
    device = event.get("device_time")
    return PowerOff(datetime.fromisoformat(event["received_at"]),
                    datetime.fromisoformat(device) if device else None)


def _channels(step: IgnitionRun) -> tuple[str, ...]:
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
        return replace(state, completed=completed, power_off=None)
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
        for channel in _channels(step):
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
    return replace(state, completed=completed, power_off=power_off, clocks=clocks)


def _job_channels(state: JobState) -> list[str]:
    channel = state.configuration.channel
    return [channel] if channel else ["A", "B"]


def _connection_effects(state: JobState, step: Check) -> list[dict[str, Any]]:
    """What ticking a check does to the engine's channels (stored with the event)."""
    effects: list[dict[str, Any]] = []
    for channel in _job_channels(state):
        effects += [{"effect": "disturb", "what": w, "channel": channel} for w in step.disturbs]
        effects += [{"effect": "restore", "what": w, "channel": channel} for w in step.restores]
    if step.ignition_off:
        effects += [{"effect": "de_energise", "channel": c} for c in ("A", "B")]
    return effects


def _check_energise(state: JobState, step: IgnitionRun, data: Mapping[str, Any],
                    at: Circumstances) -> dict[str, Any]:
    """Energising: every channel whole on the engine (whatever job opened it), and each
    fitted exciter's own duty-cycle clock (carried across jobs and tablets) allows it."""
    channels = _channels(step)
    if at.engine is None:
        raise RuleRefusal("engine_unknown", "The engine's state could not be read: nothing is "
                          "energised without it.")
    check_channels_whole(at.engine, channels)
    gates.check_energise({c: at.engine.clock_for(c) for c in channels}, channels, at.now,
                         at.device_now)
    duty = [[p.on_max_s, p.off_min_s] for p in gates.duty_periods(step.duty_cycle)]
    return {**data, "engine": [{"effect": "energise", "channel": c, "duty": duty}
                               for c in channels]}


def _release(state: JobState, at: Circumstances) -> dict[str, Any]:
    """A certification's release statement, and the due checks a functional check meets."""
    if at.engine is None:
        raise RuleRefusal("engine_unknown", "The engine's state could not be read: no release "
                          "to service is given without it.")
    procedure = state.procedure
    effects = release.passed_channel_checks(procedure.kind, state.readings)
    work = (f"job {at.job_id}: {procedure.title}, shop procedure revision "
            f"{state.revision[:12] or 'unknown'} (from {procedure.source.document}, "
            f"{procedure.source.section}, {procedure.source.revision})")
    statement = release.release_statement(at.engine, work, at.job_id, effects)
    said = {"release": statement.as_data(), "engine": effects}
    if not statement.released:
        said["meaning"] = "Certified: work complete, not released to service"
    return said


def _check_item_closed(data: Mapping[str, Any], at: Circumstances) -> dict[str, Any]:
    """An open item of the engine put right in this job: which one, and what was done."""
    items = {i.id: i for i in (at.engine.open_items if at.engine else ())}
    item = items.get(str(data.get("item", "")))
    if item is None:
        raise RuleRefusal("no_such_item", "That is not an open item of this engine.")
    how = data.get("how")
    if not isinstance(how, str) or not how.strip() or len(how.strip()) > 300:
        raise readings.InputProblem("how", "Say what was done to put it right (at most 300 "
                                    "characters), with the reference of the work.")
    return {"item": item.id, "reference": item.reference, "text": item.text,
            "how": how.strip(), "engine": [{"effect": "close_item", "item": item.id}]}


def job_progress(state: JobState) -> str:
    """Where a job stands, in the words of the job list: in work, returned, waiting for
    inspection, waiting for certification, released, closed (not released)."""
    if state.status == "complete":
        certified = [e for e in state.completed.values()
                     if e.get("kind") == "signed" and "release" in e.get("data", {})]
        if certified and certified[-1]["data"]["release"].get("released"):
            return "released"
        return "closed, not released"
    upcoming = state.next_step
    if upcoming is not None and isinstance(upcoming.step, Sign) and not state.awaiting_finding:
        if upcoming.step.role == "inspector":
            return "waiting for inspection"
        if upcoming.step.role == "certifying":
            return "waiting for certification"
    signed_since_return = any(e.get("kind") == "signed" for e in state.completed.values())
    if state.returns and not signed_since_return:
        return "returned"
    return "in work"


def _check_part(state: JobState, step: PartChange, data: Mapping[str, Any],
                at: Circumstances) -> dict[str, Any]:
    channel = state.configuration.channel
    if at.engine is None or channel is None:
        raise RuleRefusal("engine_unknown", "A part is recorded against the engine's state "
                          "for one channel; it could not be read.")
    return evaluate_part(step, data, channel, at.engine, at.allowed_parts, at.whereabouts)


def _plug_at_work(state: JobState) -> dict[str, Any]:
    """The plug a wear reading belongs to: the job's channel's installed plug."""
    plugs = [c for c in state.configuration.components if c.get("kind") == "plug"]
    if len(plugs) != 1:
        raise RuleRefusal("plug_unknown", "A wear reading belongs to one plug, but this job "
                          f"has {len(plugs)} recorded: open the job for one channel.")
    plug = plugs[0]
    if plug.get("id") is None:
        raise RuleRefusal("plug_unknown", "No plug was recorded as fitted on this channel when "
                          "the job opened, so the wear reading has no serial to follow.")
    return {"id": plug.get("id"), "part_number": plug.get("part_number"),
            "serial": plug.get("serial"), "channel": plug.get("channel")}


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
    return replace(state, readings=readings, completed={**state.completed, step.id: event})


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
    if event["data"].get("disposition") in ("replaced", "deferred") or step.kind == "part":
        # A part that did not match is on the record with its finding; a reading re-tested
        # waits for the new reading.
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
    return isinstance(step, DischargeWait) or (isinstance(step, Check)
                                               and step.power == "removed")


@dataclass(frozen=True)
class Circumstances:
    """What a rule needs beyond the job's own events: clocks, the person, the engine's tags."""

    now: datetime
    device_now: datetime | None
    person_id: int
    job_id: int
    tags: Mapping[str, Tag] = field(default_factory=dict)
    names: Mapping[int, str] = field(default_factory=dict)
    roles: tuple[str, ...] = ()
    authorisations: tuple[Authorisation, ...] = ()  # the signer's (not revoked), for `signed`
    engine: EngineState | None = None      # the engine's state (parts, connections, clocks)
    allowed_parts: tuple[AllowedPart, ...] = ()   # for a part step
    whereabouts: Whereabouts = Whereabouts()      # of the serial an install step names
    roles_of: Mapping[int, tuple[str, ...]] = field(default_factory=dict)  # people it names


def needs_engine_tags(state: JobState, kind: str, step_id: str | None) -> bool:
    """Whether checking this event needs the tags hanging on the engine (read from every job
    on it): tag events, energising, and completing a lockout step."""
    if kind in gates.TAG_EVENT_KINDS or kind == "energised":
        return True
    target = state.step(step_id) if step_id and kind == "step_done" else None
    return target is not None and isinstance(target.step, Lockout)


def check_event(state: JobState, kind: str, step_id: str | None, data: Mapping[str, Any],
                at: Circumstances) -> Mapping[str, Any]:
    """Refuse an event the rules do not allow, with a reason a mechanic understands; return
    the data to store with it (readings come back with their conversion and verdict).

    Raises RuleRefusal for a rule, readings.InputProblem for a value that cannot be a reading.
    """
    if kind not in CLIENT_EVENT_KINDS:
        raise RuleRefusal("unknown_event_kind", f"'{kind}' is not something this station "
                          "records; known: " + ", ".join(CLIENT_EVENT_KINDS) + ".")
    if kind == "amendment":
        return signoff.check_amendment(state, step_id, data, at)
    if state.status != "open":
        raise RuleRefusal("job_not_open", f"This job is {job_progress(state)}: nothing more "
                          "is recorded on it; a correction is made as an amendment by a "
                          "supervisor, new work in a new job.")
    if kind == "tag_taken_over":
        return tag_handover.check_tag_taken_over(data, at.tags, at.person_id)
    if kind == "tag_handed_over":
        return tag_handover.check_tag_handed_over(data, at.tags, at.person_id, at.roles_of)
    if kind == "tag_transfer_authorised":
        return tag_handover.check_tag_transfer_authorised(data, at.tags, at.person_id,
                                                          at.roles, at.roles_of)
    if kind == "input_reconnected":
        if state.power_off is None:
            raise RuleRefusal("power_not_removed", "The input is not recorded as disconnected.")
        return {**data, "engine": [{"effect": "restore", "what": "input", "channel": c}
                                   for c in _job_channels(state)]}
    if kind == "de_energised":
        # Switching off is never held back: on by this job's log or by the engine's clocks.
        engine_clocks = at.engine.channel_clocks() if at.engine is not None else {}
        clocks = {c: (engine_clocks[c] if c in engine_clocks and engine_clocks[c].is_on
                      else state.clocks.get(c, engine_clocks.get(c)))
                  for c in {*state.clocks, *engine_clocks}}
        gates.check_de_energise({c: k for c, k in clocks.items() if k is not None},
                                data.get("channel"))
        channel = data.get("channel")
        return {**data, "engine": [{"effect": "de_energise", "channel": c}
                                   for c in ([channel] if channel else ["A", "B"])]}
    if kind == "returned":
        return signoff.check_return(state, data, at)
    if kind == "item_closed":
        return _check_item_closed(data, at)
    target = state.step(step_id) if step_id else None
    if target is None:
        raise RuleRefusal("unknown_step", f"Step '{step_id}' is not part of this job's "
                          "procedure for the installed configuration.")
    if kind == "energised":
        gates.check_pre_energising(state.open_gate_steps(), at.tags, at.names)
    if target.status == "done":
        raise RuleRefusal("already_done", f"Step {target.number} is already done.")
    upcoming = state.next_step
    if upcoming is not None and upcoming.id != target.id:
        raise RuleRefusal("out_of_order", f"Step {upcoming.number} ('{_short(upcoming.step)}') "
                          f"comes first: steps are done in the procedure's order.",
                          next_step=upcoming.id)
    step = target.step
    if kind in IN_STEP_EVENTS:
        if step.kind not in IN_STEP_EVENTS[kind]:
            raise RuleRefusal("wrong_event_for_step", f"'{kind}' does not belong to a "
                              f"{step.kind} step.")
        return _check_in_step(state, step, kind, data, at)
    wanted = COMPLETING_EVENT.get(step.kind)
    if wanted is None:
        raise RuleRefusal("step_kind_not_available", f"This station cannot record "
                          f"'{step.kind}' steps yet. The job waits at step "
                          f"{target.number}; do not go on without the approved procedure.")
    if kind != wanted:
        verb = "acknowledged" if wanted == "acknowledged" else "marked done"
        raise RuleRefusal("wrong_event_for_step", f"A {step.kind} step is {verb}, "
                          f"not '{kind}'.")
    return _check_completion(state, target, data, at)


def _check_in_step(state: JobState, step: Step, kind: str, data: Mapping[str, Any],
                   at: Circumstances) -> Mapping[str, Any]:
    if isinstance(step, Lockout):
        if kind == "breaker_tagged":
            return gates.check_breaker_tagged(step, data, at.tags, at.job_id)
        if kind == "tag_removal_authorised":
            return tag_handover.check_tag_removal_authorised(step, data, at.tags, at.person_id,
                                                             at.roles, at.job_id)
        return tag_handover.check_tag_removed(step, data, at.tags, at.person_id, at.job_id)
    if step.id not in state.awaiting_finding:
        raise RuleRefusal("no_reading_to_disposition", "A finding goes with an out-of-limits "
                          "reading; this step has none waiting.")
    return readings.evaluate_finding(data)


def _check_completion(state: JobState, target: StepProgress, data: Mapping[str, Any],
                      at: Circumstances) -> Mapping[str, Any]:
    step = target.step
    if isinstance(step, (Reading, Torque, SparkCount)):
        if step.id in state.awaiting_finding:
            raise RuleRefusal("finding_required", "The last reading was out of limits: record "
                              "the finding and what was done before anything else.")
        if isinstance(step, Torque):
            return readings.evaluate_torque(step, data, at.now.date())
        if isinstance(step, SparkCount):
            return readings.evaluate_spark_count(step, data, state.single_channel_rates())
        stored = readings.evaluate_reading(step, data)
        if isinstance(step, Reading) and step.wear:
            stored["plug"] = _plug_at_work(state)
        return stored
    if isinstance(step, Check) and step.items:
        ticked = data.get("items")
        if not isinstance(ticked, list) or sorted(set(ticked)) != list(range(len(step.items))):
            raise RuleRefusal("items_unconfirmed", f"Every item of step {target.number} must be "
                              "confirmed before it is done.", items=len(step.items))
    elif isinstance(step, Lockout):
        missing = gates.lockout_complete(step, at.tags, at.job_id)
        if missing and step.action == "apply":
            raise RuleRefusal("lockout_incomplete", ("Write the number of the tag you find on "
                              if step.confirm_existing else "Tag ") + "every breaker of this "
                              "step first: " + ", ".join(missing) + " not tagged for this job.",
                              breakers=missing)
        if missing:
            raise RuleRefusal("tags_still_on", "Tags still hang on " + ", ".join(missing)
                              + "; each comes off by its owner first.", breakers=missing)
    elif isinstance(step, DischargeWait):
        gates.check_discharge_served(gates.discharge_requirement(step), state.power_off,
                                     at.now, at.device_now)
    elif isinstance(step, IgnitionRun):
        return _check_energise(state, step, data, at)
    elif isinstance(step, PartChange):
        return _check_part(state, step, data, at)

    elif isinstance(step, Sign):
        signed = dict(signoff.check_signature(state, target, at))
        return {**signed, **_release(state, at)} if step.role == "certifying" else signed
    if isinstance(step, Check) and (step.disturbs or step.restores or step.ignition_off):
        return {**data, "engine": _connection_effects(state, step)}
    return data


def _short(step: Step) -> str:
    text = step.text.strip().splitlines()[0]
    return text if len(text) <= 60 else text[:57] + "..."
