"""The rules an incoming event must pass, given the job's state and what the station knows
beyond it (the engine's state, the person, the clocks); what a job's progress is called.

`check_event` refuses an event the rules do not allow (RuleRefusal) or a value that
cannot be right (InputProblem), and returns the data to store with it: readings with
their conversion and verdict, and each effect the event has on the engine (`engine`),
which the engine's fold then reads (see `engine`). Pure: plain values in and out.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from . import (
    entry_conflicts,
    exciter_rows,
    gates,
    instruments,
    isolation,
    readings,
    release,
    signoff,
    spark_counts,
    sparks,
    supply,
    tag_handover,
    torque,
    usage,
)
from .authorisations import Authorisation
from .engine import EngineState, check_channels_whole
from .errors import RuleRefusal
from .execution import (
    CLIENT_EVENT_KINDS,
    COMPLETING_EVENT,
    IN_STEP_EVENTS,
    JobState,
    StepProgress,
    run_channels,
)
from .gates import Tag
from .instruments import Instrument
from .parts import AllowedPart, Whereabouts, evaluate_part
from .procedures import (
    Check,
    DischargeWait,
    IgnitionRun,
    Lockout,
    PartChange,
    Reading,
    Sign,
    SparkCount,
    Step,
    Torque,
)


def _job_channels(state: JobState) -> list[str]:
    channel = state.configuration.channel
    return [channel] if channel else ["A", "B"]


def _connection_effects(state: JobState, step: Check, job_id: int) -> list[dict[str, Any]]:
    """What ticking a check does to the engine's channels and items (stored with the event)."""
    effects: list[dict[str, Any]] = []
    if step.opens_item is not None:
        where = f" (channel {state.configuration.channel})" if state.configuration.channel else ""
        effects.append({"effect": "defer", "text": step.opens_item.text + where,
                        "reference": f"J{job_id}-{step.id}", "limit": step.opens_item.limit})
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
    channels = run_channels(step)
    if at.engine is None:
        raise RuleRefusal("engine_unknown", "The engine's state could not be read: nothing is "
                          "energised without it.")
    check_channels_whole(at.engine, channels)
    gates.check_energise({c: at.engine.clock_for(c) for c in channels}, channels,
                         at.work_time, at.device_now)
    duty = [[p.on_max_s, p.off_min_s] for p in gates.duty_periods(step.duty_cycle)]
    return {**data, "engine": [{"effect": "energise", "channel": c, "duty": duty}
                               for c in channels]}


def _release(state: JobState, at: Circumstances) -> dict[str, Any]:
    """A certification's release statement, and the due checks a functional check meets."""
    if at.engine is None:
        raise RuleRefusal("engine_unknown", "The engine's state could not be read: no release "
                          "to service is given without it.")
    statement, effects = release.job_statement(state, at.engine, at.job_id)
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
        given = release.given_release(state)
        return "released" if given is not None and given.released else "closed, not released"
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
    return _with_usage_entry(evaluate_part(step, data, channel, at.engine, at.allowed_parts,
                                           at.whereabouts), at)


def _with_usage_entry(stored: dict[str, Any], at: Circumstances) -> dict[str, Any]:
    """Usage totals the event carries must follow the engine's last entry; accepted, they
    become its last entry (an effect on the engine)."""
    if at.engine is None:
        raise RuleRefusal("engine_unknown", "Usage totals are checked against the engine's "
                          "last entry; the engine's state could not be read.")
    usage.check_entry(at.engine.usage, stored["usage"], at.now, at.device_now)
    return {**stored, "engine": [*stored.get("engine", []), usage.usage_effect(stored["usage"])]}


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


@dataclass(frozen=True)
class Circumstances:
    """What a rule needs beyond the job's own events: clocks, the person, the engine's tags."""

    now: datetime      # when the entry reached the station
    device_now: datetime | None
    person_id: int
    job_id: int
    tags: Mapping[str, Tag] = field(default_factory=dict)
    names: Mapping[int, str] = field(default_factory=dict)  # tags' people, the job's, yours
    roles: tuple[str, ...] = ()
    authorisations: tuple[Authorisation, ...] = ()  # the signer's (not revoked), for `signed`
    engine: EngineState | None = None      # the engine's state (parts, connections, clocks)
    allowed_parts: tuple[AllowedPart, ...] = ()   # for a part step
    whereabouts: Whereabouts = Whereabouts()      # of the serial an install step names
    roles_of: Mapping[int, tuple[str, ...]] = field(default_factory=dict)  # people it names
    instrument: Instrument | None = None  # the register's entry for the ID a reading names
    # When the work was done, by the station's clock: `now`, or earlier for an entry that
    # waited on a tablet (placed by the tablet's count: placement.py). Only the rules that
    # time the work between two entries use it (the discharge wait, the grounding window,
    # an exciter's cooling, a counting window); what must hold when the station decides
    # (an authorisation, an instrument's calibration, usage totals) is judged at `now`, so
    # no claim of a device can make a lapsed one pass.
    made: datetime | None = None
    counted: bool = False  # `made` was placed by the tablet's count of the entry's wait

    @property
    def work_time(self) -> datetime:
        return self.made or self.now


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
    if kind == "lead_grounded":
        return isolation.check_grounded_again(state)
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
        raise entry_conflicts.step_already_done(target, kind, data, at.person_id, at.names)
    if kind == COMPLETING_EVENT.get(target.step.kind):
        # Ahead of the order rule, so a jump to such work hears why it is dangerous.
        isolation.check_isolation_verified(state, target.step)
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
    isolation.check_before_step(state, step, at.work_time, at.device_now)
    return _check_completion(state, target, data, at)


def _check_in_step(state: JobState, step: Step, kind: str, data: Mapping[str, Any],
                   at: Circumstances) -> Mapping[str, Any]:
    if isinstance(step, Lockout):
        if kind == "breaker_tagged":
            return gates.check_breaker_tagged(step, data, at.tags, at.job_id, at.person_id,
                                              at.names)
        if kind == "tag_removal_authorised":
            return tag_handover.check_tag_removal_authorised(step, data, at.tags, at.person_id,
                                                             at.roles, at.job_id)
        return tag_handover.check_tag_removed(step, data, at.tags, at.person_id, at.job_id)
    if kind == "count_started":
        if step.id in state.awaiting_finding:
            raise RuleRefusal("finding_required", "The last count was out of limits: record "
                              "the finding and what was done before counting again.")
        return {}
    if step.id not in state.awaiting_finding:
        raise RuleRefusal("no_reading_to_disposition", "A finding goes with an out-of-limits "
                          "reading; this step has none waiting.")
    isolation.finding_allowed(step, data)
    return readings.evaluate_finding(data)


def _check_completion(state: JobState, target: StepProgress, data: Mapping[str, Any],
                      at: Circumstances) -> Mapping[str, Any]:
    step = target.step
    if isinstance(step, (Reading, Torque, SparkCount)):
        if step.id in state.awaiting_finding:
            raise RuleRefusal("finding_required", "The last reading was out of limits: record "
                              "the finding and what was done before anything else.")
        stored = _evaluate_reading(state, step, data, at)
        return instruments.with_instrument(step, data, stored, at.instrument, at.now.date())
    return _check_other_completion(state, target, data, at)


def _evaluate_reading(state: JobState, step: Reading | Torque | SparkCount,
                      data: Mapping[str, Any], at: Circumstances) -> dict[str, Any]:
    if isinstance(step, Torque):
        return torque.evaluate_torque(step, data,
                                      torque.accepted_fasteners(step, state.readings))
    if isinstance(step, SparkCount):
        # The row of the step's limits for the exciters fitted now, and their types'
        # supply limits: judged against what is on the engine, not what was.
        fitted = exciter_rows.fitted_exciters(
            at.engine, state.configuration.components,
            ("A", "B") if step.channel == "both" else (step.channel,))
        chosen = exciter_rows.limits_for(step.limits, [f.part_number for f in fitted])
        stored = spark_counts.evaluate_spark_count(
            step, data, state.single_channel_rates(step.mode), chosen)
        stored["exciters"] = {f.channel: f.part_number for f in fitted}
        stored["supply"] = supply.evaluate_supply(
            [f.type for f in fitted if f.type] or state.configuration.exciter_types,
            data.get("supply"), step.supply)
        if not stored["supply"]["within"]:
            # A count at a supply outside its limits proves nothing about the unit.
            stored["verdict"] = "out of limits"
        sparks.check_window_served(state.count_windows.get(step.id), stored, at.work_time,
                                   at.device_now)
        return stored
    stored = isolation.isolation_verdict(step, readings.evaluate_reading(step, data))
    if isinstance(step, Reading) and step.wear:
        stored["plug"] = _plug_at_work(state)
        return _with_usage_entry(stored, at)
    return stored


def _check_other_completion(state: JobState, target: StepProgress, data: Mapping[str, Any],
                            at: Circumstances) -> Mapping[str, Any]:
    step = target.step
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
        fitted = exciter_rows.fitted_exciters(at.engine, state.configuration.components,
                                              _job_channels(state))
        need = gates.discharge_requirement(step, [f.part_number for f in fitted])
        gates.check_discharge_served(need, state.power_off, at.work_time, at.device_now,
                                     counted=at.counted)
        if need.capacitor_from:
            return {**data, "capacitor_from": need.capacitor_from}
    elif isinstance(step, IgnitionRun):
        return _check_energise(state, step, data, at)
    elif isinstance(step, PartChange):
        return _check_part(state, step, data, at)

    elif isinstance(step, Sign):
        signed = dict(signoff.check_signature(state, target, at))
        return {**signed, **_release(state, at)} if step.role == "certifying" else signed
    if isinstance(step, Check) and (step.disturbs or step.restores or step.ignition_off
                                    or step.opens_item):
        return {**data, "engine": _connection_effects(state, step, at.job_id)}
    return data


def _short(step: Step) -> str:
    text = step.text.strip().splitlines()[0]
    return text if len(text) <= 60 else text[:57] + "..."
