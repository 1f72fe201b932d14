"""Safety gates: lockout/tagout, the discharge wait, the pre-energising gate, the duty cycle.

Each rule takes plain values (times, events, steps) and either passes or raises
RuleRefusal with a sentence a mechanic can act on. Times are the station's
receipt times; where the device's own times are known as well, a wait counts as
served only when both clocks say so (an event synced later cannot shorten it).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from datetime import datetime
from typing import Any

from . import energy, entry_conflicts
from .errors import RuleRefusal
from .exciter_rows import capacitor_rows
from .placement import COUNTED_WAIT_MARGIN_S
from .procedures import DischargeWait, DutyCycle, Lockout
from .units import parse_quantity, seconds

# Consents a tag's move needs: its owner's hand-over, or a supervisor's authorisation when the
# owner is gone (to another mechanic, or for the removal itself at a release step).
CONSENT_KINDS = ("tag_handed_over", "tag_transfer_authorised", "tag_removal_authorised")
TAG_EVENT_KINDS = ("breaker_tagged", "tag_taken_over", "tag_removed", *CONSENT_KINDS)
MAX_TAG_LENGTH = 24


# --- lockout / tagout ---------------------------------------------------------------------

@dataclass(frozen=True)
class Consent:
    """A standing permission to move a tag: given by its owner (`tag_handed_over`) or by a
    supervisor for an absent owner; it lapses when the tag changes owner or comes off."""

    kind: str               # one of CONSENT_KINDS
    event_id: str
    by: int                 # the owner who handed it over, or the authorising supervisor
    to: int | None          # the incoming mechanic; None for a removal
    job_id: int             # the job it was recorded on
    at: str
    reason: str = ""


@dataclass(frozen=True)
class Tag:
    """A tag hanging on a breaker of an engine's ignition, and who answers for it now."""

    number: str
    breaker: str
    owner_id: int
    job_id: int
    applied_by: int
    applied_at: str
    owner_since: str                              # hung, or last changed owner
    confirmed_in: frozenset[int] = frozenset()    # jobs that found it hanging and said so
    consents: tuple[Consent, ...] = ()
    handovers: int = 0                            # times it changed owner

    def consent_for(self, person_id: int) -> Consent | None:
        """The hand-over or authorisation that lets this person take the tag over, if any."""
        return next((c for c in self.consents
                     if c.kind != "tag_removal_authorised" and c.to == person_id), None)

    def removal_authorised_in(self, job_id: int) -> Consent | None:
        """A supervisor's absent-owner authorisation to take the tag off in this job."""
        return next((c for c in self.consents
                     if c.kind == "tag_removal_authorised" and c.job_id == job_id), None)


def engine_tags(events: Iterable[Mapping[str, Any]]) -> dict[str, Tag]:
    """The tags active on an engine: a fold over its jobs' tag events in station order."""
    tags: dict[str, Tag] = {}
    for e in events:
        tags = next_tags(tags, e)
    return tags


def next_tags(tags: Mapping[str, Tag], e: Mapping[str, Any]) -> dict[str, Tag]:
    """The tags after one more event of any job on the engine (other kinds change nothing)."""
    data, kind = e["data"], e["kind"]
    if kind not in TAG_EVENT_KINDS:
        return dict(tags)
    tags = dict(tags)
    number = str(data["tag"]).strip()  # as the checks read it: " T-1 " is tag T-1
    tag, at = tags.get(number), e["received_at"]
    if kind == "breaker_tagged" and data.get("confirmed_existing"):
        if tag is not None:
            tags[number] = replace(tag, confirmed_in=tag.confirmed_in | {e["job_id"]})
    elif kind == "breaker_tagged":
        tags[number] = Tag(number, data["breaker"], e["person_id"], e["job_id"],
                           e["person_id"], at, at)
    elif tag is None:
        pass
    elif kind == "tag_taken_over":
        tags[number] = replace(tag, owner_id=e["person_id"], job_id=e["job_id"],
                               owner_since=at, consents=(), handovers=tag.handovers + 1)
    elif kind == "tag_removed":
        del tags[number]
    elif kind in CONSENT_KINDS:
        # An owner's later hand-over replaces their earlier one (they changed their mind).
        kept = tuple(c for c in tag.consents
                     if not (kind == "tag_handed_over" and c.kind == kind))
        consent = Consent(kind, str(e.get("id", "")), e["person_id"], data.get("to"),
                          e["job_id"], at, str(data.get("reason", "")))
        tags[number] = replace(tag, consents=(*kept, consent))
    return tags


def tag_number(data: Mapping[str, Any]) -> str:
    """The tag number an event names, as written on the tag (surrounding spaces dropped)."""
    number = data.get("tag")
    if not isinstance(number, str) or not number.strip():
        raise RuleRefusal("tag_number_missing", "Write the number printed on the tag.")
    number = number.strip()
    if len(number) > MAX_TAG_LENGTH:
        raise RuleRefusal("tag_number_missing", f"A tag number is at most {MAX_TAG_LENGTH} "
                          "characters; check what was typed.")
    return number


def check_breaker_tagged(step: Lockout, data: Mapping[str, Any], tags: Mapping[str, Tag],
                         job_id: int, person_id: int | None = None,
                         names: Mapping[int, str] | None = None) -> dict[str, Any]:
    """A breaker of this lockout step opened, collared and tagged with a new tag; or, at a
    step that confirms existing tags, the number of a tag found hanging on it. Returns the
    data to store (a confirmation names the tag's owner then). A refusal because the tag or
    breaker is recorded already names who recorded it (`names`) and what to do."""
    names = names or {}
    if step.action != "apply":
        raise RuleRefusal("wrong_event_for_step", "This step removes tags; it does not hang "
                          "new ones.")
    breakers = {b.id for b in step.breakers}
    breaker = data.get("breaker")
    if breaker not in breakers:
        raise RuleRefusal("unknown_breaker", f"Breaker '{breaker}' is not one this step "
                          f"locks out ({', '.join(sorted(breakers))}).")
    number = tag_number(data)
    found = tags.get(number)
    if found is not None and step.confirm_existing:
        if found.breaker != breaker:
            raise RuleRefusal("tag_elsewhere", f"Tag {number} hangs on {found.breaker}, not on "
                              f"{breaker}: check the breaker and the number on the tag.")
        if found.job_id == job_id or job_id in found.confirmed_in:
            raise RuleRefusal("already_confirmed", f"Tag {number} already counts for this job.")
        return {"breaker": breaker, "tag": number, "confirmed_existing": True,
                "owner": found.owner_id}
    if found is not None:
        raise entry_conflicts.tag_already_recorded(number, breaker, found, job_id,
                                                   _me(person_id), names)
    on_breaker = sorted(t.number for t in tags.values() if t.breaker == breaker)
    if step.confirm_existing and on_breaker:
        # A number that does not match what hangs there is a misread, not a second tag.
        raise RuleRefusal("tag_not_found", f"No tag {number} hangs on {breaker}; the station "
                          f"has {', '.join(on_breaker)} there. Check the number on the tag.")
    held = [t for t in tags.values() if t.breaker == breaker and t.job_id == job_id]
    if held:
        raise entry_conflicts.breaker_already_tagged(number, breaker, held[0], _me(person_id),
                                                     names)
    return {"breaker": breaker, "tag": number}


def _me(person_id: int | None) -> int:
    return person_id if person_id is not None else -1  # unknown: nobody's "you"


def lockout_complete(step: Lockout, tags: Mapping[str, Tag], job_id: int) -> list[str]:
    """The breakers still to tag (apply) or to untag (release); empty when the step is met."""
    if step.action == "apply":  # this job's own tags, or tags it found hanging and confirmed
        return [b.id for b in step.breakers
                if not any(t.breaker == b.id and (t.job_id == job_id or job_id in t.confirmed_in)
                           for t in tags.values())]
    return sorted({t.breaker for t in tags.values()} & {b.id for b in step.breakers})


def tags_blocking_energising(tags: Mapping[str, Tag]) -> list[Tag]:
    return sorted(tags.values(), key=lambda t: (t.breaker, t.number))


# --- discharge wait -------------------------------------------------------------------------

@dataclass(frozen=True)
class DischargeRequirement:
    """How long to wait, and why: the data's minimum, and the bleed-down estimate if given."""

    minimum_s: float
    computed_s: float | None
    capacitance_f: float | None = None
    charge_voltage_v: float | None = None
    bleed_resistance_ohm: float | None = None
    safe_voltage_v: float | None = None
    capacitor_from: str = ""   # the capacitor data's row: "default", a part number, ...
    charge_voltage: str = ""   # as the data writes them, for the record
    safe_voltage: str = ""

    @property
    def required_s(self) -> float:
        return max(self.minimum_s, self.computed_s or 0.0)

    @property
    def energy_j(self) -> float | None:
        if self.capacitance_f is None or self.charge_voltage_v is None:
            return None
        return energy.stored_energy(self.capacitance_f, self.charge_voltage_v)

    def voltage_after(self, elapsed_s: float) -> float | None:
        if self.capacitance_f is None or self.charge_voltage_v is None \
                or self.bleed_resistance_ohm is None:
            return None
        return energy.voltage_after(self.charge_voltage_v, self.bleed_resistance_ohm,
                                    self.capacitance_f, max(elapsed_s, 0.0))


def discharge_requirement(step: DischargeWait,
                          part_numbers: Sequence[str | None] = ()) -> DischargeRequirement:
    """The larger of the data's minimum and t = RC·ln(V0/Vsafe) for the capacitor data's row
    of the fitted exciters' part numbers (every row, when one is not known: the longest
    bleed-down wins); missing data never shortens it."""
    minimum = seconds(str(step.minimum))
    found = DischargeRequirement(minimum, None)
    for cap, source in capacitor_rows(step.capacitor, part_numbers):
        c = parse_quantity(str(cap.capacitance), "capacitance").to("farad").magnitude
        v0 = parse_quantity(str(cap.charge_voltage), "voltage").to("volt").magnitude
        r = parse_quantity(str(cap.bleed_resistance), "resistance").to("ohm").magnitude
        vs = parse_quantity(str(cap.safe_voltage), "voltage").to("volt").magnitude
        row = DischargeRequirement(minimum, energy.time_to_voltage(v0, vs, r, c), c, v0, r, vs,
                                   source, str(cap.charge_voltage), str(cap.safe_voltage))
        if found.computed_s is None or (row.computed_s or 0.0) > found.computed_s:
            found = row
    return found


@dataclass(frozen=True)
class PowerOff:
    """When the exciter's input was disconnected, by both clocks."""

    station: datetime
    device: datetime | None
    # Placed by the tablet's count of how long its entry waited (domain/placement.py).
    by_count: bool = False


def wait_remaining(required_s: float, power_off: PowerOff, now: datetime,
                   device_now: datetime | None) -> float:
    """Seconds still to wait (0 when served by the station's clock and, if known, the device's)."""
    remaining = required_s - (now - power_off.station).total_seconds()
    if power_off.device is not None and device_now is not None:
        remaining = max(remaining, required_s - (device_now - power_off.device).total_seconds())
    return max(remaining, 0.0)


def check_discharge_served(requirement: DischargeRequirement, power_off: PowerOff | None,
                           now: datetime, device_now: datetime | None,
                           counted: bool = False) -> None:
    """The wait served by the station's clock and the device's; when either end of it was
    placed by a tablet's count, with the margin that count asks (domain/placement.py)."""
    if power_off is None:
        raise RuleRefusal("power_not_removed", "The exciter's input is not recorded as "
                          "disconnected: disconnect it first; the wait counts from then.")
    required = requirement.required_s + (
        COUNTED_WAIT_MARGIN_S if counted or power_off.by_count else 0.0)
    left = wait_remaining(required, power_off, now, device_now)
    if left > 0:
        whole = int(left) + (left % 1 > 0)
        raise RuleRefusal("discharge_wait", f"The discharge wait is not over: {_mmss(whole)} "
                          "to go. Do not touch the lead before then, and ground it first.",
                          seconds_remaining=whole)


# --- duty cycle ----------------------------------------------------------------------------

@dataclass(frozen=True)
class DutyPeriod:
    """One on-period's limit and the mandatory off-time after it (None: no on limit)."""

    on_max_s: float | None
    off_min_s: float


def duty_periods(cycle: DutyCycle) -> tuple[DutyPeriod, ...]:
    """The cycle as (on, off) pairs; a continuous rating has none."""
    if cycle.continuous:
        return ()
    if cycle.max_on is not None and cycle.min_off is not None:
        return (DutyPeriod(seconds(str(cycle.max_on)), seconds(str(cycle.min_off))),)
    entries = [(e.split(" ", 1)[0], seconds(e.split(" ", 1)[1])) for e in cycle.pattern or []]
    periods: list[DutyPeriod] = []
    for state, duration in entries:
        if state == "on":
            periods.append(DutyPeriod(duration, 0.0))
        elif periods:
            last = periods[-1]
            periods[-1] = DutyPeriod(last.on_max_s, last.off_min_s + duration)
        else:  # a pattern that starts with "off": the rest before the first on
            periods.append(DutyPeriod(None, duration))
    return tuple(periods)


@dataclass(frozen=True)
class ChannelClock:
    """One exciter's on/off history in a job, as the duty cycle sees it."""

    periods: tuple[DutyPeriod, ...] = ()
    on_since: PowerOff | None = None     # reuses (station, device) times
    off_since: PowerOff | None = None
    period: int = 0                      # index of the current or last on-period
    runs: int = 0
    overrun_s: float = 0.0               # the largest time past an on-limit so far

    @property
    def is_on(self) -> bool:
        return self.on_since is not None

    @property
    def required_off_s(self) -> float:
        return self.periods[self.period].off_min_s if self.periods and self.runs else 0.0

    @property
    def on_limit_s(self) -> float | None:
        return self.periods[self.period].on_max_s if self.periods else None

    def _next_period(self, gap_s: float) -> int:
        if not self.periods or not self.runs:
            return 0
        full_rest = max(p.off_min_s for p in self.periods)
        return 0 if gap_s >= full_rest else (self.period + 1) % len(self.periods)

    def energised(self, at: PowerOff, periods: tuple[DutyPeriod, ...]) -> ChannelClock:
        gap = (at.station - self.off_since.station).total_seconds() if self.off_since else 0.0
        clock = replace(self, periods=periods) if periods != self.periods else self
        return replace(clock, on_since=at, off_since=None, period=clock._next_period(gap),
                       runs=self.runs + 1)

    def de_energised(self, at: PowerOff) -> ChannelClock:
        assert self.on_since is not None
        on_for = (at.station - self.on_since.station).total_seconds()
        over = on_for - self.on_limit_s if self.on_limit_s is not None else 0.0
        return replace(self, on_since=None, off_since=at, overrun_s=max(self.overrun_s, over))

    def on_for_s(self, now: datetime) -> float:
        return (now - self.on_since.station).total_seconds() if self.on_since else 0.0

    def off_remaining_s(self, now: datetime, device_now: datetime | None = None) -> float:
        """Seconds until the next ON is allowed (0 when it is allowed now)."""
        if self.is_on or self.off_since is None:
            return 0.0
        return wait_remaining(self.required_off_s, self.off_since, now, device_now)

    def on_remaining_s(self, now: datetime) -> float | None:
        """Seconds left of this on-period's limit (negative past it); None when unlimited."""
        if not self.is_on or self.on_limit_s is None:
            return None
        return self.on_limit_s - self.on_for_s(now)


ON_LIMIT_WARNING_S = 30.0


def check_energise(clocks: Mapping[str, ChannelClock], channels: Sequence[str],
                   now: datetime, device_now: datetime | None) -> None:
    for channel in channels:
        clock = clocks.get(channel, ChannelClock())
        if clock.is_on:
            raise RuleRefusal("already_on", f"Channel {channel} is already energised.")
        left = clock.off_remaining_s(now, device_now)
        if left > 0:
            whole = int(left) + (left % 1 > 0)
            raise RuleRefusal("duty_cycle_off", f"Channel {channel}'s exciter must stay off for "
                              f"{_mmss(whole)} more (duty cycle); energising now can "
                              "overheat it.", seconds_remaining=whole, channel=channel)


def check_de_energise(clocks: Mapping[str, ChannelClock], channel: str | None) -> None:
    """De-energising is never held back, but it must switch something off."""
    if channel not in (None, "A", "B"):
        raise RuleRefusal("unknown_channel", f"'{channel}' is not an ignition channel (A or B).")
    if not any(clock.is_on for c, clock in clocks.items() if channel in (None, c)):
        raise RuleRefusal("not_on", "No exciter is recorded as energised"
                          + (f" on channel {channel}." if channel else "."))


def check_pre_energising(gate_steps_open: Sequence[str], tags: Mapping[str, Tag],
                         names: Mapping[int, str]) -> None:
    """Before any exciter is energised: the procedure's gate done, and no tag hanging."""
    if gate_steps_open:
        raise RuleRefusal("pre_energising_gate", "The confirmations before energising are not "
                          "all in: " + ", ".join(gate_steps_open) + ".",
                          open_steps=list(gate_steps_open))
    hanging = tags_blocking_energising(tags)
    if hanging:
        said = "; ".join(f"{t.number} on {t.breaker} ({names.get(t.owner_id, 'unknown')})"
                         for t in hanging)
        raise RuleRefusal("tags_active", f"Tags still hang on this engine's ignition breakers: "
                          f"{said}. Each is removed by its owner before anything is energised.",
                          tags=[t.number for t in hanging])


def _mmss(total_seconds: float) -> str:
    whole = max(int(total_seconds), 0)
    return f"{whole // 60}:{whole % 60:02d}"


def mmss(total_seconds: float) -> str:
    """Seconds as m:ss for people (rounded up, so a wait is never shown shorter)."""
    value = max(total_seconds, 0.0)
    return _mmss(int(value) + (value % 1 > 0))
