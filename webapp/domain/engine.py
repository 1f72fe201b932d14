"""An engine's own truth, folded from the events of all its jobs over the fleet's starting
configuration: what is fitted in each position, which channels are disturbed (input or
lead disconnected, a part off), each exciter's duty-cycle clock (by serial, so on-time and
cooling carry across jobs and tablets), the parts removed from it, and its open items.

Events say what they did to the engine in `data["engine"]`: a list of effects the station
wrote when it accepted the event (the rule that accepted it knew the step and the job's
channel). The fold reads only those effects, so replaying an engine's events needs no
procedure, and `apply_engine_event` on the kept state equals a full replay.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from datetime import datetime
from typing import Any, Literal

from .errors import RuleRefusal
from .gates import TAG_EVENT_KINDS, ChannelClock, Consent, DutyPeriod, PowerOff, Tag, next_tags
from .usage import UsageEntry, entry_of, later_entry

PART_KINDS = ("exciter", "lead", "plug")
CHANNELS = ("A", "B")
PART_LABELS = {"exciter": "exciter", "lead": "high-tension lead", "plug": "igniter plug"}
CONNECTION_LABELS = {"input": "low-voltage input disconnected",
                     "lead_at_exciter": "high-tension lead disconnected at the exciter",
                     "lead_at_plug": "high-tension lead disconnected at the plug"}
RemovalStatus = Literal["unserviceable", "serviceable"]
# The kept state's layout: a kept value of another format is rebuilt by a replay, never read.
STATE_FORMAT = 3


def position_key(kind: str, channel: str) -> str:
    return f"{kind}:{channel}"


@dataclass(frozen=True)
class FittedPart:
    part_number: str
    serial: str
    type: str
    job_id: int | None = None        # the job that fitted it (None: the starting configuration)
    at: str | None = None            # station time it was recorded as fitted
    usage: Mapping[str, Any] | None = None   # the engine's usage when fitted
    release: str | None = None
    condition: str | None = None


@dataclass(frozen=True)
class Emptied:
    """Why a position is empty: the job and step that took its part off, and when."""

    job_id: int
    step_id: str | None
    at: str
    part_number: str
    serial: str


@dataclass(frozen=True)
class Position:
    kind: str
    channel: str
    fitted: FittedPart | None = None
    emptied: Emptied | None = None

    @property
    def label(self) -> str:
        return f"channel {self.channel} {PART_LABELS[self.kind]}"


@dataclass(frozen=True)
class Disturbance:
    """A connection opened on a channel, by which job and step: it stays until restored."""

    what: str                 # input | lead
    channel: str
    job_id: int
    step_id: str | None
    at: str

    def said(self) -> str:
        step = f", step {self.step_id}" if self.step_id else ""
        return f"{CONNECTION_LABELS[self.what]} in job {self.job_id}{step}"


@dataclass(frozen=True)
class RemovedPart:
    kind: str
    channel: str
    part_number: str
    serial: str
    status: str               # unserviceable | serviceable
    reason: str
    tag: str
    job_id: int
    step_id: str | None
    at: str
    fitted_at: str | None = None
    usage_at_fitting: Mapping[str, Any] | None = None
    usage_at_removal: Mapping[str, Any] | None = None


@dataclass(frozen=True)
class OpenItem:
    """A deferred defect: open on the engine until a later job closes it."""

    id: str                   # the deferring event's id
    job_id: int
    step_id: str | None
    text: str
    reference: str
    limit: str
    raised_at: str


@dataclass(frozen=True)
class CheckDue:
    """Work that disturbed a channel's ignition: a functional check must pass after it."""

    channel: str
    job_id: int
    step_id: str | None
    at: str

    def said(self) -> str:
        return (f"a functional check of channel {self.channel} is due after the work of job "
                f"{self.job_id}")


@dataclass(frozen=True)
class EngineState:
    positions: Mapping[str, Position] = field(default_factory=dict)
    disturbed: tuple[Disturbance, ...] = ()
    clocks: Mapping[str, ChannelClock] = field(default_factory=dict)  # by exciter serial
    removed: tuple[RemovedPart, ...] = ()
    open_items: tuple[OpenItem, ...] = ()
    checks_due: tuple[CheckDue, ...] = ()
    tags: Mapping[str, Tag] = field(default_factory=dict)   # lockout tags hanging now
    usage: UsageEntry | None = None   # the last usage totals entered (readings, part steps)

    def position(self, kind: str, channel: str) -> Position:
        return self.positions.get(position_key(kind, channel), Position(kind, channel))

    def fitted(self, kind: str, channel: str) -> FittedPart | None:
        return self.position(kind, channel).fitted

    def clock_for(self, channel: str) -> ChannelClock:
        """The duty-cycle clock of the exciter fitted on a channel (a fresh one if none)."""
        exciter = self.fitted("exciter", channel)
        return self.clocks.get(exciter.serial, ChannelClock()) if exciter else ChannelClock()

    def channel_clocks(self) -> dict[str, ChannelClock]:
        return {c: self.clock_for(c) for c in CHANNELS if self.fitted("exciter", c)}

    def not_whole(self, channel: str) -> list[str]:
        """Why a channel must not be energised: each part off and each connection open."""
        why = []
        for kind in PART_KINDS:
            position = self.position(kind, channel)
            if position.fitted is None:
                if position.emptied is not None:
                    e = position.emptied
                    why.append(f"{PART_LABELS[kind]} {e.serial} removed in job {e.job_id}"
                               + (f", step {e.step_id}" if e.step_id else ""))
                else:
                    why.append(f"no {PART_LABELS[kind]} recorded as fitted")
        why += [d.said() for d in self.disturbed if d.channel == channel]
        return why

    def where_fitted(self, kind: str, serial: str) -> Position | None:
        return next((p for p in self.positions.values()
                     if p.kind == kind and p.fitted is not None and p.fitted.serial == serial),
                    None)


def starting_state(parts: Iterable[Mapping[str, Any]]) -> EngineState:
    """The engine as the fleet configuration lists it, before the station's first job."""
    positions = {}
    for p in parts:
        positions[position_key(p["kind"], p["channel"])] = Position(
            p["kind"], p["channel"], FittedPart(p["part_number"], p["serial"], p["type"]))
    return EngineState(positions=positions)


def engine_state(start: EngineState, events: Iterable[Mapping[str, Any]]) -> EngineState:
    """The engine's state after its events in station order (a full replay)."""
    state = start
    for event in events:
        state = apply_engine_event(state, event)
    return state


def _times(event: Mapping[str, Any]) -> PowerOff:
    device = event.get("device_time")
    return PowerOff(datetime.fromisoformat(event["received_at"]),
                    datetime.fromisoformat(device) if device else None)


def effects_of(event: Mapping[str, Any]) -> list[Mapping[str, Any]]:
    data = event.get("data") or {}
    found = data.get("engine") if isinstance(data, Mapping) else None
    return list(found) if isinstance(found, list) else []


def apply_engine_event(state: EngineState, event: Mapping[str, Any]) -> EngineState:
    """One more event of any job on the engine; an event without effects changes nothing
    (lockout tag events change the tags, by their kind)."""
    if event.get("kind") in TAG_EVENT_KINDS:
        state = replace(state, tags=next_tags(state.tags, event))
    for effect in effects_of(event):
        state = _apply_effect(state, event, effect)
    return state


def _apply_effect(state: EngineState, event: Mapping[str, Any],
                  effect: Mapping[str, Any]) -> EngineState:
    what, channel = effect.get("effect"), str(effect.get("channel") or "")
    at = event["received_at"]
    if what == "usage":
        return replace(state, usage=later_entry(state.usage, entry_of(event, effect)))
    if what in ("disturb", "remove", "install") and not any(
            (d.channel, d.job_id) == (channel, event["job_id"]) for d in state.checks_due):
        state = replace(state, checks_due=(*state.checks_due, CheckDue(
            channel, event["job_id"], event.get("step_id"), at)))
    if what == "check_passed":
        # Only work done before the passing count is covered by it.
        counted = datetime.fromisoformat(effect["counted_at"])
        return replace(state, checks_due=tuple(
            d for d in state.checks_due
            if d.channel != channel or datetime.fromisoformat(d.at) > counted))
    if what == "disturb":
        mark = Disturbance(effect["what"], channel, event["job_id"], event.get("step_id"), at)
        if any((d.what, d.channel, d.job_id) == (mark.what, mark.channel, mark.job_id)
               for d in state.disturbed):
            return state
        return replace(state, disturbed=(*state.disturbed, mark))
    if what == "restore":
        return replace(state, disturbed=tuple(d for d in state.disturbed if not (
            d.what == effect["what"] and d.channel == channel)))
    if what == "remove":
        return _removed(state, event, effect)
    if what == "install":
        key = position_key(effect["kind"], channel)
        fitted = FittedPart(effect["part_number"], effect["serial"], effect["type"],
                            event["job_id"], at, effect.get("usage"), effect.get("release"),
                            effect.get("condition"))
        clocks = state.clocks
        if isinstance(effect.get("clock"), Mapping):   # it came from another engine
            clocks = {**clocks, effect["serial"]: clock_of(effect["clock"])}
        return replace(state, positions={**state.positions,
                                         key: Position(effect["kind"], channel, fitted)},
                       clocks=clocks)
    if what == "energise":
        exciter = state.fitted("exciter", channel)
        if exciter is None:
            return state
        periods = tuple(DutyPeriod(on, off) for on, off in effect.get("duty", []))
        clock = state.clocks.get(exciter.serial, ChannelClock())
        if clock.is_on:
            return state
        return replace(state, clocks={**state.clocks,
                                      exciter.serial: clock.energised(_times(event), periods)})
    if what == "de_energise":
        clocks = dict(state.clocks)
        for c in ([channel] if channel else list(CHANNELS)):
            exciter = state.fitted("exciter", c)
            if exciter is not None and clocks.get(exciter.serial, ChannelClock()).is_on:
                clocks[exciter.serial] = clocks[exciter.serial].de_energised(_times(event))
        return replace(state, clocks=clocks)
    if what == "defer":
        item = OpenItem(event["id"], event["job_id"], event.get("step_id"), effect["text"],
                        effect["reference"], effect["limit"], at)
        return replace(state, open_items=(*state.open_items, item))
    if what == "close_item":
        return replace(state, open_items=tuple(i for i in state.open_items
                                               if i.id != effect["item"]))
    return state


def _removed(state: EngineState, event: Mapping[str, Any],
             effect: Mapping[str, Any]) -> EngineState:
    kind, channel = effect["kind"], effect["channel"]
    before = state.fitted(kind, channel)
    emptied = Emptied(event["job_id"], event.get("step_id"), event["received_at"],
                      effect["part_number"], effect["serial"])
    removed = RemovedPart(kind, channel, effect["part_number"], effect["serial"],
                          effect["status"], effect["reason"], effect["tag"], event["job_id"],
                          event.get("step_id"), event["received_at"],
                          before.at if before else None, before.usage if before else None,
                          effect.get("usage"))
    # The removed exciter's clock stays under its serial: refitted, it goes on from there.
    return replace(state, positions={**state.positions, position_key(kind, channel):
                                     Position(kind, channel, None, emptied)},
                   removed=(*state.removed, removed))


# --- rules that read the engine ------------------------------------------------------------

def check_channels_whole(state: EngineState, channels: Sequence[str]) -> None:
    """Energising a channel is refused while any part of it is off or disconnected, by any
    job on the engine; the refusal names the job and step."""
    said = []
    for channel in channels:
        why = state.not_whole(channel)
        if why:
            said.append(f"channel {channel}: " + "; ".join(why))
    if said:
        said_all = ". ".join(said)
        raise RuleRefusal("channel_disturbed", "Nothing is energised on a channel that is not "
                          "whole. " + said_all[0].upper() + said_all[1:] + ". Finish or put "
                          "back that work first.", channels=list(channels))


# --- the kept value, as JSON ----------------------------------------------------------------

def clock_data(clock: ChannelClock) -> dict[str, Any]:
    def times(t: PowerOff | None) -> list[str | None] | None:
        return None if t is None else [t.station.isoformat(),
                                       t.device.isoformat() if t.device else None]
    return {"periods": [[p.on_max_s, p.off_min_s] for p in clock.periods],
            "on_since": times(clock.on_since), "off_since": times(clock.off_since),
            "period": clock.period, "runs": clock.runs, "overrun_s": clock.overrun_s}


def clock_of(data: Mapping[str, Any]) -> ChannelClock:
    def times(t: list[str | None] | None) -> PowerOff | None:
        if t is None:
            return None
        station, device = t
        assert station is not None
        return PowerOff(datetime.fromisoformat(station),
                        datetime.fromisoformat(device) if device else None)
    return ChannelClock(tuple(DutyPeriod(on, off) for on, off in data["periods"]),
                        times(data["on_since"]), times(data["off_since"]), data["period"],
                        data["runs"], data["overrun_s"])


def state_as_data(state: EngineState) -> dict[str, Any]:
    def part(p: FittedPart | None) -> dict[str, Any] | None:
        return None if p is None else {**p.__dict__, "usage": dict(p.usage or {}) or None}
    return {
        "format": STATE_FORMAT,
        "positions": {k: {"kind": p.kind, "channel": p.channel, "fitted": part(p.fitted),
                          "emptied": None if p.emptied is None else dict(p.emptied.__dict__)}
                      for k, p in sorted(state.positions.items())},
        "disturbed": [dict(d.__dict__) for d in state.disturbed],
        "clocks": {k: clock_data(c) for k, c in sorted(state.clocks.items())},
        "removed": [{**r.__dict__,
                     "usage_at_fitting": dict(r.usage_at_fitting or {}) or None,
                     "usage_at_removal": dict(r.usage_at_removal or {}) or None}
                    for r in state.removed],
        "open_items": [dict(i.__dict__) for i in state.open_items],
        "checks_due": [dict(d.__dict__) for d in state.checks_due],
        "tags": {n: {**t.__dict__, "confirmed_in": sorted(t.confirmed_in),
                     "consents": [dict(c.__dict__) for c in t.consents]}
                 for n, t in sorted(state.tags.items())},
        "usage": None if state.usage is None else dict(state.usage.__dict__),
    }


def state_of(data: Mapping[str, Any]) -> EngineState:
    positions = {}
    for key, p in data["positions"].items():
        fitted = FittedPart(**p["fitted"]) if p["fitted"] else None
        emptied = Emptied(**p["emptied"]) if p["emptied"] else None
        positions[key] = Position(p["kind"], p["channel"], fitted, emptied)
    return EngineState(
        positions=positions,
        disturbed=tuple(Disturbance(**d) for d in data["disturbed"]),
        clocks={k: clock_of(c) for k, c in data["clocks"].items()},
        removed=tuple(RemovedPart(**r) for r in data["removed"]),
        open_items=tuple(OpenItem(**i) for i in data["open_items"]),
        checks_due=tuple(CheckDue(**d) for d in data.get("checks_due", ())),
        tags={n: Tag(**{**t, "confirmed_in": frozenset(t["confirmed_in"]),
                        "consents": tuple(Consent(**c) for c in t["consents"])})
              for n, t in data.get("tags", {}).items()},
        usage=UsageEntry(**data["usage"]) if data.get("usage") else None)
