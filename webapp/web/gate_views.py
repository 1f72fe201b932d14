"""What the step screen shows about the gates: tags, the discharge clock, the duty cycle.

Only presentation: every figure comes from webapp.domain.gates; the station
enforces the rules on every write, the page merely counts down for comfort.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import Any

from .. import store
from ..domain import exciter_rows, gates, isolation
from ..domain.engine import EngineState
from ..domain.execution import JobState
from ..domain.gates import ChannelClock, Consent, DischargeRequirement, Tag
from ..domain.procedures import (
    DischargeWait,
    DutyCycle,
    IgnitionRun,
    Lockout,
    PartChange,
    SparkCount,
)
from ..station import recording
from ..store import engines, people


@dataclass(frozen=True)
class ConsentView:
    """A hand-over or an authorisation waiting on a tag, as the tag list says it."""

    consent: Consent
    by: str
    to: str | None


@dataclass(frozen=True)
class TagView:
    tag: Tag
    owner: str
    counts_here: bool = False              # this job's own tag, or one it confirmed
    consents: tuple[ConsentView, ...] = ()

    def may_take_over(self, person_id: int) -> bool:
        return self.tag.consent_for(person_id) is not None

    def removal_authorised(self, job_id: int) -> ConsentView | None:
        found = self.tag.removal_authorised_in(job_id)
        return next((c for c in self.consents if c.consent == found), None) if found else None


@dataclass(frozen=True)
class ChannelView:
    channel: str
    is_on: bool
    on_for: float
    on_limit: float | None
    on_remaining: float | None
    off_remaining: float


@dataclass(frozen=True)
class DischargeView:
    requirement: DischargeRequirement
    remaining: float
    elapsed: float
    power_off_at: str | None
    voltage_now: float | None
    energy_now: float | None


def _channel(name: str, clock: ChannelClock, now: datetime) -> ChannelView:
    return ChannelView(name, clock.is_on, clock.on_for_s(now), clock.on_limit_s,
                       clock.on_remaining_s(now), clock.off_remaining_s(now))


def duty_text(cycle: DutyCycle) -> str:
    if cycle.continuous:
        return ""
    if cycle.max_on is not None:
        return f"on for at most {cycle.max_on}, then off for at least {cycle.min_off}"
    return " / ".join(cycle.pattern or [])


def _discharge(step: DischargeWait, state: JobState, now: datetime,
               engine: EngineState | None) -> DischargeView:
    channels = [state.configuration.channel] if state.configuration.channel else ["A", "B"]
    fitted = exciter_rows.fitted_exciters(engine, state.configuration.components, channels)
    requirement = gates.discharge_requirement(step, [f.part_number for f in fitted])
    if state.power_off is None:
        return DischargeView(requirement, requirement.required_s, 0.0, None, None, None)
    elapsed = (now - state.power_off.station).total_seconds()
    remaining = gates.wait_remaining(requirement.required_s, state.power_off, now, None)
    voltage = requirement.voltage_after(elapsed)
    energy_now = (None if voltage is None or requirement.capacitance_f is None
                  else 0.5 * requirement.capacitance_f * voltage * voltage)
    return DischargeView(requirement, remaining, elapsed, state.power_off.station.isoformat(),
                         voltage, energy_now)


def _tag_views(db: store.Database, tags: dict[str, Tag], job_id: int) -> list[TagView]:
    """Each hanging tag with its owner's name and the consents waiting on it."""
    ids = {t.owner_id for t in tags.values()} | {
        i for t in tags.values() for c in t.consents for i in (c.by, c.to) if i is not None}
    names = people.names_by_id(db, ids)
    return [TagView(t, names.get(t.owner_id, "unknown"),
                    t.job_id == job_id or job_id in t.confirmed_in,
                    tuple(ConsentView(c, names.get(c.by, "unknown"),
                                      None if c.to is None else names.get(c.to, "unknown"))
                          for c in t.consents))
            for t in sorted(tags.values(), key=lambda t: (t.breaker, t.number))]


def _mechanics(db: store.Database) -> list[tuple[int, str]]:
    """Who a tag may be handed to: the station's active mechanics, by name."""
    return sorted(((p.id, p.full_name) for p in people.all_people(db)
                   if p.active and p.has("mechanic")), key=lambda p: p[1])


@dataclass(frozen=True)
class GroundingView:
    """When the lead was last grounded in the job, and whether the next step needs it again."""

    grounded_at: str | None
    age_s: float | None
    valid_for_s: int
    due: bool           # the next step handles the lead or exciter and the grounding lapsed
    may_record: bool    # the procedure's grounding step is done: grounding again is recorded


def _grounding(state: JobState, step: Any, now: datetime) -> GroundingView | None:
    grounding_steps = [s for s in state.applicable if isolation.is_grounding(s)]
    if not grounding_steps or state.status != "open":
        return None
    grounded = state.lead_grounded
    return GroundingView(
        grounded.station.isoformat() if grounded else None,
        isolation.grounding_age_s(grounded, now, None) if grounded else None,
        isolation.GROUNDING_VALID_S,
        step is not None and isolation.grounding_due(state, step, now),
        any(s.id in state.completed for s in grounding_steps))


def gate_context(db: store.Database, job: recording.Job, now: datetime) -> dict[str, Any]:
    """Everything the step screen's gate panels need, for the job as it stands now."""
    state = job.state
    engine = engines.current(db, job.row["engine_id"])
    tags = dict(engine.tags)
    tag_list = _tag_views(db, tags, job.row["id"])
    by_breaker: dict[str, list[TagView]] = {}
    for view in tag_list:
        by_breaker.setdefault(view.tag.breaker, []).append(view)
    context: dict[str, Any] = {
        "tag_list": tag_list, "tags_by_breaker": by_breaker, "lockout_missing": [],
        "mechanics": _mechanics(db) if tag_list else [],
        # Each fitted exciter's own clock (by serial), whichever job ran it.
        "channels": [_channel(c, clock, now) for c, clock in sorted(engine.channel_clocks().items())
                     if clock.runs],
        "engine": engine, "run_blocked": {}, "part": None,
        "open_gate_steps": state.open_gate_steps(), "discharge": None,
        "run_channels": [], "run_wait": 0.0, "duty_text": "", "count_limits": None,
        "count_exciters": [],
    }
    current = state.next_step
    step = current.step if current else None
    context["grounding"] = _grounding(state, step, now)
    if isinstance(step, Lockout):
        context["lockout_missing"] = gates.lockout_complete(step, tags, job.row["id"])
    elif isinstance(step, DischargeWait):
        context["discharge"] = _discharge(step, state, now, engine)
    elif isinstance(step, IgnitionRun):
        channels = ("A", "B") if step.channel == "both" else (step.channel,)
        views = [_channel(c, engine.clock_for(c), now) for c in channels]
        context.update(run_channels=views, duty_text=duty_text(step.duty_cycle),
                       run_wait=max((v.off_remaining for v in views), default=0.0),
                       run_blocked={c: engine.not_whole(c) for c in channels
                                    if engine.not_whole(c)})
    elif isinstance(step, SparkCount):
        # The row of the step's limits the station will judge against, and where it is from.
        channels = ("A", "B") if step.channel == "both" else (step.channel,)
        fitted = exciter_rows.fitted_exciters(engine, state.configuration.components, channels)
        context["count_limits"] = exciter_rows.limits_for(step.limits,
                                                          [f.part_number for f in fitted])
        context["count_exciters"] = fitted
    elif isinstance(step, PartChange):
        channel = state.configuration.channel or "A"
        context["part"] = {"position": engine.position(step.part, channel),
                           "allowed": [a for a in engines.allowed_parts(db, job.row["engine_id"])
                                       if a.fits(step.part, channel)]}
    return context
