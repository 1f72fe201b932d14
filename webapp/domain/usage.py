"""The engine's usage totals as read from the aircraft's records (engine hours, starts,
continuous-ignition hours): what each is called, whether a new entry can follow the last one
the engine holds, and a plug's usage since it was fitted.

Engine hours are the engine's own running time, not flight hours: a plug wears while the
engine runs (and fastest under continuous ignition), whether the aircraft flies or not.

The decision rule is conservative: an entry the station cannot square with the last one
is refused with both sets of figures, for the mechanic to check against the records; it
is never taken on trust. The bounds below are plausibility limits, not the approved data.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from .errors import RuleRefusal
from .readings import InputProblem

ENGINE_HOURS = "engine hours"        # the unit name on every screen, axis and record
SINCE_FITTED = "engine hours since fitted"
TOTALS = "engine total hours"
MEASURES = ("engine_hours", "starts", "continuous_ignition_hours")
MEASURE_NAMES = {"engine_hours": "engine hours", "starts": "starts",
                 "continuous_ignition_hours": "continuous-ignition hours"}
FIELD_LABELS = {
    "engine_hours": "Engine total hours (from the aircraft's records)",
    "starts": "Engine total starts (from the aircraft's records)",
    "continuous_ignition_hours": "Continuous-ignition total hours (from the aircraft's records)"}

# Hour totals in the records are kept to a tenth of an hour, so two honest entries can
# differ by one tenth more than the clock allows (common practice, no source).
HOURS_RESOLUTION = 0.1
# Starts any gap may hold however short it is (repeated start attempts, maintenance ground
# runs), and the most starts per hour of clock time beyond that: a short-haul turboprop
# flies about one sector an hour at most (from memory). Wide on purpose: the bound is there
# to catch a mistyped figure (an extra digit), not to judge the operation.
STARTS_ANY_GAP = 10
STARTS_PER_CLOCK_HOUR = 4.0


@dataclass(frozen=True)
class UsageEntry:
    """The engine's totals as last entered, by which job and step, and when.

    `at` is the time the entry carries (the tablet's clock when it sent one: an entry made
    offline carries the time it was made); `received_at` is the station's clock."""

    engine_hours: float
    starts: int
    continuous_ignition_hours: float | None
    job_id: int
    step_id: str | None
    at: str
    received_at: str

    def totals(self) -> dict[str, float | None]:
        return {m: getattr(self, m) for m in MEASURES}

    def said(self) -> str:
        return f"job {self.job_id}, {_when(self.at)}"


def _when(iso: str) -> str:
    moment = datetime.fromisoformat(iso)
    moment = moment.replace(tzinfo=UTC) if moment.tzinfo is None else moment.astimezone(UTC)
    return moment.strftime("%Y-%m-%d %H:%M UTC")


def _aware(moment: datetime) -> datetime:
    return moment.replace(tzinfo=UTC) if moment.tzinfo is None else moment


def _number(name: str, value: float | None) -> str:
    if value is None:
        return "not entered"
    return f"{value:.0f}" if name == "starts" else f"{value:.1f}"


def _figure(name: str, value: float | None) -> str:
    return f"{MEASURE_NAMES[name]} {_number(name, value)}"


def totals_said(usage: Mapping[str, Any]) -> str:
    """Usage totals as screens and records print them, each with its unit name."""
    said = (f"engine totals (from the aircraft's records) {usage.get('engine_hours', 0):g} "
            f"{ENGINE_HOURS}, {usage.get('starts')} starts")
    if usage.get("continuous_ignition_hours") is not None:
        said += f", {usage['continuous_ignition_hours']:g} continuous-ignition hours"
        if usage.get("continuous_ignition_estimated"):
            said += " (estimated)"
    return said


def usage_effect(usage: Mapping[str, Any]) -> dict[str, Any]:
    """The engine effect an accepted usage entry is stored with (the engine's fold reads it)."""
    return {"effect": "usage", **{m: usage.get(m) for m in MEASURES}}


def entry_of(event: Mapping[str, Any], effect: Mapping[str, Any]) -> UsageEntry:
    return UsageEntry(float(effect["engine_hours"]), int(effect["starts"]),
                      None if effect.get("continuous_ignition_hours") is None
                      else float(effect["continuous_ignition_hours"]),
                      event["job_id"], event.get("step_id"),
                      event.get("device_time") or event["received_at"], event["received_at"])


def later_entry(last: UsageEntry | None, new: UsageEntry) -> UsageEntry:
    """The entry the engine keeps: the one that carries the later time (an offline entry
    that arrives late does not replace a newer one)."""
    if last is None:
        return new
    return new if _aware(datetime.fromisoformat(new.at)) >= _aware(
        datetime.fromisoformat(last.at)) else last


def check_entry(last: UsageEntry | None, usage: Mapping[str, Any], now: datetime,
                device_now: datetime | None) -> None:
    """Refuse usage totals that cannot follow the engine's last entry.

    Raises InputProblem when continuous-ignition hours exceed engine hours (ignition runs
    only while the engine runs, so its total cannot be larger: physics). Raises RuleRefusal
    `usage_backwards` when a total is lower than an earlier entry's, and
    `usage_implausible_rise` when totals rose more than the time between the entries allows:
    engine hours by more than the clock hours elapsed (an engine cannot run longer than the
    time that passed: physics), continuous-ignition hours by more than engine hours
    (physics), starts by more than STARTS_ANY_GAP + STARTS_PER_CLOCK_HOUR per clock hour.

    Which entry came first goes by the times they carry: an entry made offline carries the
    tablet's time of entry, so a late sync of earlier, lower figures is not "backwards"; it
    must instead be no higher than the later entry. The time elapsed is taken as wide as
    the entries' times allow (from the earliest of their carried and received times to
    the latest receipt), so a tablet clock that is off or a late sync never shrinks the
    allowance below the real time that passed; a mistyped digit still far exceeds it.
    """
    hours, ci = usage.get("engine_hours"), usage.get("continuous_ignition_hours")
    if hours is not None and ci is not None and ci > hours:
        raise InputProblem("continuous_ignition_hours", f"Continuous-ignition hours {ci:.1f} "
                           f"cannot exceed the engine's total hours {hours:.1f}: ignition runs "
                           "only while the engine does. Check both against the records.")
    if last is None:
        return
    now = _aware(now)
    carried = _aware(device_now) if device_now is not None else now
    last_at = _aware(datetime.fromisoformat(last.at))
    last_received = _aware(datetime.fromisoformat(last.received_at))
    earliest = min(carried, now, last_at, last_received)
    elapsed_h = (max(now, last_received) - earliest).total_seconds() / 3600
    new_is_later = carried >= last_at
    earlier, later = ((last.totals(), dict(usage)) if new_is_later
                      else (dict(usage), last.totals()))
    entered = f"entered {_when(carried.isoformat())}"
    for name in MEASURES:
        before, after = earlier.get(name), later.get(name)
        if before is None or after is None or after >= before:
            continue
        if new_is_later:
            reason = (f"{_figure(name, usage.get(name))} is below the last entry "
                      f"{_number(name, last.totals()[name])} ({last.said()}).")
        else:
            reason = (f"{_figure(name, usage.get(name))} ({entered}) is above the later entry "
                      f"{_number(name, last.totals()[name])} ({last.said()}).")
        raise RuleRefusal("usage_backwards", reason[0].upper() + reason[1:] + " Totals only "
                          "rise: check the figure against the aircraft's records (and the "
                          "tablet's clock).", measure=name, entered=usage.get(name),
                          last=last.totals()[name], last_job=last.job_id, last_at=last.at)
    # Rounded to a thousandth, so a tenth's floating-point residue does not tip a bound.
    rise: dict[str, float] = {}
    for n in MEASURES:
        up, down = later.get(n), earlier.get(n)
        if up is not None and down is not None:
            rise[n] = round(up - down, 3)
    why = None
    if "engine_hours" in rise and rise["engine_hours"] > elapsed_h + HOURS_RESOLUTION:
        why = (f"engine hours rose by {rise['engine_hours']:.1f} but at most {elapsed_h:.1f} "
               "hours of clock time passed between the entries")
    elif ("continuous_ignition_hours" in rise and "engine_hours" in rise
          and rise["continuous_ignition_hours"] > rise["engine_hours"] + HOURS_RESOLUTION):
        why = (f"continuous-ignition hours rose by {rise['continuous_ignition_hours']:.1f} "
               f"but engine hours only by {rise['engine_hours']:.1f}, and ignition runs only "
               "while the engine does")
    elif "starts" in rise and rise["starts"] > STARTS_ANY_GAP + STARTS_PER_CLOCK_HOUR * elapsed_h:
        allowed = STARTS_ANY_GAP + STARTS_PER_CLOCK_HOUR * elapsed_h
        why = (f"starts rose by {rise['starts']:.0f}, more than the {allowed:.0f} that "
               f"{elapsed_h:.1f} hours of clock time can plausibly hold")
    if why is not None:
        figures = ", ".join(_figure(n, usage.get(n)) for n in MEASURES
                            if usage.get(n) is not None)
        before_said = ", ".join(_figure(n, v) for n, v in last.totals().items() if v is not None)
        raise RuleRefusal("usage_implausible_rise", f"The entry ({figures}; {entered}) cannot "
                          f"follow the last entry ({before_said}; {last.said()}): {why}. Check "
                          "the figures against the aircraft's records.",
                          elapsed_hours=round(elapsed_h, 2), last_job=last.job_id,
                          last_at=last.at)


def since_fit(totals: Mapping[str, Any], at_fit: Mapping[str, Any] | None
              ) -> dict[str, float] | None:
    """Usage since a part was fitted: each total minus the engine's total at the fit.

    None when the fit's totals are unknown, or when a total is below the fit's (the figures
    are then not of this fit: another engine, or a mistake) — never a guess."""
    if not at_fit:
        return None
    since: dict[str, float] = {}
    for name in MEASURES:
        now, then = totals.get(name), at_fit.get(name)
        if now is None or then is None:
            continue
        if now < then:
            return None
        since[name] = now - then
    return since if "engine_hours" in since else None


@dataclass(frozen=True)
class WearBasis:
    """What a plug's wear is charted and forecast against: usage since its fit where the
    fit's totals are known and every inspection is of that fit, else the engine's totals,
    said plainly. `since` holds each inspection's usage since fitted (None: not known)."""

    since_fitted: bool
    label: str
    said: str
    since: tuple[dict[str, float] | None, ...]

    def usage_of(self, index: int, total_hours: float) -> float:
        found = self.since[index]
        return found["engine_hours"] if self.since_fitted and found else total_hours


def wear_basis(points: Sequence[Mapping[str, Any]], fit: Mapping[str, Any] | None
               ) -> WearBasis:
    """Each inspection's usage since the plug's latest fit (`fit`: engine_id and `usage`, the
    engine's totals at the fit), and whether the chart can use it: only when every
    inspection is of this fit (same engine, totals at or above the fit's)."""
    at_fit = (fit or {}).get("usage")
    since = tuple(since_fit(p, at_fit) if fit and p.get("engine_id") == fit.get("engine_id")
                  else None for p in points)
    if at_fit and all(s is not None for s in since):
        return WearBasis(True, SINCE_FITTED, f"Usage since fitted, from the engine's totals at "
                         f"the fit ({_figure('engine_hours', at_fit.get('engine_hours'))}, "
                         f"{_figure('starts', at_fit.get('starts'))}).", since)
    if not at_fit:
        why = "The engine's totals when this plug was fitted are not known"
    else:
        outside = sum(1 for s in since if s is None)
        why = (f"{outside} of the inspections are not of this plug's latest fit (another "
               "engine, or totals below the fit's)")
    return WearBasis(False, TOTALS, f"{why}: the chart and forecast use the engine's total "
                     "hours, not hours since fitted.", since)
