"""What the step screen shows about the gates: tags, the discharge clock, the duty cycle.

Only presentation: every figure comes from webapp.domain.gates; the station
enforces the rules on every write, the page merely counts down for comfort.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import Any

from .. import store
from ..domain import gates
from ..domain.execution import JobState
from ..domain.gates import ChannelClock, DischargeRequirement, Tag
from ..domain.procedures import DischargeWait, DutyCycle, IgnitionRun, Lockout
from ..station import recording
from ..store import people


@dataclass(frozen=True)
class TagView:
    tag: Tag
    owner: str


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


def _discharge(step: DischargeWait, state: JobState, now: datetime) -> DischargeView:
    requirement = gates.discharge_requirement(step)
    if state.power_off is None:
        return DischargeView(requirement, requirement.required_s, 0.0, None, None, None)
    elapsed = (now - state.power_off.station).total_seconds()
    remaining = gates.wait_remaining(requirement.required_s, state.power_off, now, None)
    voltage = requirement.voltage_after(elapsed)
    energy_now = (None if voltage is None or requirement.capacitance_f is None
                  else 0.5 * requirement.capacitance_f * voltage * voltage)
    return DischargeView(requirement, remaining, elapsed, state.power_off.station.isoformat(),
                         voltage, energy_now)


def gate_context(db: store.Database, job: recording.Job, now: datetime) -> dict[str, Any]:
    """Everything the step screen's gate panels need, for the job as it stands now."""
    state = job.state
    tags = recording.engine_tags(db, job.row["engine_id"])
    names = people.names_by_id(db, {t.owner_id for t in tags.values()})
    tag_list = [TagView(t, names.get(t.owner_id, "unknown"))
                for t in sorted(tags.values(), key=lambda t: (t.breaker, t.number))]
    by_breaker: dict[str, list[TagView]] = {}
    for view in tag_list:
        by_breaker.setdefault(view.tag.breaker, []).append(view)
    context: dict[str, Any] = {
        "tag_list": tag_list, "tags_by_breaker": by_breaker, "lockout_missing": [],
        "channels": [_channel(c, state.clocks[c], now) for c in sorted(state.clocks)],
        "open_gate_steps": state.open_gate_steps(), "discharge": None,
        "run_channels": [], "run_wait": 0.0, "duty_text": "",
    }
    current = state.next_step
    step = current.step if current else None
    if isinstance(step, Lockout):
        context["lockout_missing"] = gates.lockout_complete(step, tags, job.row["id"])
    elif isinstance(step, DischargeWait):
        context["discharge"] = _discharge(step, state, now)
    elif isinstance(step, IgnitionRun):
        channels = ("A", "B") if step.channel == "both" else (step.channel,)
        views = [_channel(c, state.clocks.get(c, ChannelClock()), now) for c in channels]
        context.update(run_channels=views, duty_text=duty_text(step.duty_cycle),
                       run_wait=max((v.off_remaining for v in views), default=0.0))
    return context
