"""The work record's safety gates (section 5): tags, handovers, power, discharge, ignition."""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from ..domain import exciter_rows, gates
from ..domain.execution import JobState
from ..domain.procedures import Check, DischargeWait, IgnitionRun, Lockout
from ..store import Database
from ..store import jobs as job_store
from .record_entries import Entry, People, Who, station_time, step_of


@dataclass(frozen=True)
class TagLine:
    tag: str
    breaker: str
    action: str                 # hung, found hanging, handed over, taken over, removed, ...
    by: Who | None
    at: str
    job_id: int
    other_job: bool
    detail: str = ""


@dataclass(frozen=True)
class Handover:
    tag: str
    breaker: str
    from_who: Who | None
    to_who: Who | None
    at: str
    job_id: int
    consent: str = ""           # who consented, or which supervisor authorised it and why


@dataclass(frozen=True)
class DischargeLine:
    step_number: int
    required: str
    minimum: str
    computed: str               # the bleed-down estimate, advisory
    energy: str
    power_off_at: str
    confirmed_at: str
    served: str
    by: Who | None


def _tag_instances(events: Iterable[Mapping[str, Any]]) -> list[list[Mapping[str, Any]]]:
    """Each tag's life on the engine, hung to removed (a number may be used again later)."""
    active: dict[str, list[Mapping[str, Any]]] = {}
    done: list[list[Mapping[str, Any]]] = []
    for e in events:
        number = str(e["data"].get("tag", "")).strip()
        if e["kind"] == "breaker_tagged" and not e["data"].get("confirmed_existing"):
            active[number] = [e]
            done.append(active[number])
        elif number in active:
            active[number].append(e)
            if e["kind"] == "tag_removed":
                del active[number]
    return done


_ACTIONS = {"breaker_tagged": "hung", "tag_taken_over": "taken over", "tag_removed": "removed",
            "tag_handed_over": "handed over by its owner",
            "tag_transfer_authorised": "transfer authorised (absent owner)",
            "tag_removal_authorised": "removal authorised (absent owner)"}


def _name(who: Who | None) -> str:
    return who.text if who else "?"


def _consent_text(consent: Mapping[str, Any] | None, who: People) -> str:
    """Who let a tag move: its owner on their own log-in, or a supervisor, and why."""
    if consent is None:
        return "no consent recorded"
    when = station_time(consent["received_at"])
    if consent["kind"] == "tag_handed_over":
        return f"consented by the owner, {_name(who(consent['person_id']))}, with PIN, {when}"
    return (f"authorised by {_name(who(consent['person_id']))} (supervisor, owner absent) "
            f"with PIN, {when}; reason: {consent['data'].get('reason', '')}")


def _detail(e: Mapping[str, Any], owner: int, by_id: Mapping[str, Mapping[str, Any]],
            who: People) -> tuple[str, str]:
    """The action word and the details column for one tag event."""
    data, kind = e["data"], e["kind"]
    action = _ACTIONS[kind]
    if kind == "breaker_tagged" and data.get("confirmed_existing"):
        return "found hanging, confirmed", f"owner then {_name(who(data.get('owner')))}"
    if kind == "tag_taken_over":
        return action, "; ".join(filter(None, (
            "breaker re-confirmed open" if data.get("breaker_confirmed_open") else "",
            _consent_text(by_id.get(str(data.get("consent"))), who) if "consent" in data
            else "")))
    if kind == "tag_handed_over":
        return action, f"to {_name(who(data.get('to')))}, consented with the owner's PIN"
    if kind == "tag_transfer_authorised":
        return action, (f"to {_name(who(data.get('to')))}; owner {_name(who(owner))} absent; "
                        f"reason: {data.get('reason', '')}")
    if kind == "tag_removal_authorised":
        return action, f"owner {_name(who(owner))} absent; reason: {data.get('reason', '')}"
    if kind == "tag_removed" and "absent_owner_authorisation" in data:
        return ("removed (absent owner)", f"owner {_name(who(owner))} absent; " + _consent_text(
            by_id.get(str(data["absent_owner_authorisation"])), who))
    absent = data.get("absent_owner")
    if kind == "tag_removed" and isinstance(absent, Mapping):
        # Entries made before authorisations were recorded by the supervisor: the name was
        # typed by whoever removed the tag, and the record says so.
        return ("removed (absent owner)", f"owner {_name(who(owner))} absent; reason: "
                f"{absent.get('reason', '')}; supervisor named by the remover, not recorded "
                f"by them: {who.by_username(str(absent.get('supervisor', ''))).text}")
    return action, ""


def tags_and_handovers(db: Database, row: Mapping[str, Any], state: JobState,
                       who: People) -> tuple[list[TagLine], list[Handover]]:
    labels = {b.id: b.label for s in state.applicable if isinstance(s, Lockout)
              for b in s.breakers}
    engine_events = job_store.engine_events(db, row["engine_id"], gates.TAG_EVENT_KINDS)
    by_id = {str(e["id"]): e for e in engine_events}
    lines: list[TagLine] = []
    handovers: list[Handover] = []
    for life in _tag_instances(engine_events):
        if not any(e["job_id"] == row["id"] for e in life):
            continue
        breaker = str(life[0]["data"].get("breaker"))
        shown = f"{breaker} ({labels[breaker]})" if breaker in labels else breaker
        owner = life[0]["person_id"]
        for e in life:
            number = str(e["data"]["tag"]).strip()
            action, detail = _detail(e, owner, by_id, who)
            if e["kind"] == "tag_taken_over":
                consent = by_id.get(str(e["data"].get("consent")))
                handovers.append(Handover(
                    number, shown, who(owner), who(e["person_id"]),
                    station_time(e["received_at"]), e["job_id"],
                    _consent_text(consent, who) if consent or "consent" in e["data"] else ""))
                owner = e["person_id"]
            lines.append(TagLine(number, shown, action, who(e["person_id"]),
                                 station_time(e["received_at"]), e["job_id"],
                                 e["job_id"] != row["id"], detail))
    return lines, handovers


def power_entries(state: JobState, events: Sequence[Mapping[str, Any]],
                  numbers: Mapping[str, int], who: People) -> list[Entry]:
    lines = []
    for e in events:
        step = step_of(state, e["step_id"]) if e["step_id"] else None
        if e["kind"] == "step_done" and isinstance(step, Check) and step.power:
            word = ("exciter input disconnected (power off)" if step.power == "removed"
                    else "exciter input reconnected")
            lines.append(Entry(word, who(e["person_id"]), station_time(e["received_at"]),
                                   numbers.get(step.id)))
        elif (e["kind"] == "step_done" and isinstance(step, Check) and step.grounds_lead) \
                or e["kind"] == "lead_grounded":
            lines.append(Entry("high-tension lead grounded with the insulated probe"
                               + (" again, before handling after a pause"
                                  if e["kind"] == "lead_grounded" else ""),
                               who(e["person_id"]), station_time(e["received_at"]),
                               numbers.get(step.id) if step else None))
        elif e["kind"] == "input_reconnected":
            lines.append(Entry("input reconnected before the work was done: the "
                                   "disconnection and discharge wait were done again",
                                   who(e["person_id"]), station_time(e["received_at"]), None))
    return lines


def discharge_lines(state: JobState, numbers: Mapping[str, int],
                    who: People) -> list[DischargeLine]:
    power_off = next((e for s, e in state.completed.items()
                      if isinstance(step_of(state, s), Check)
                      and getattr(step_of(state, s), "power", None) == "removed"), None)
    lines = []
    for step in state.applicable:
        if not isinstance(step, DischargeWait):
            continue
        channels = [state.configuration.channel] if state.configuration.channel else ["A", "B"]
        fitted = exciter_rows.fitted_exciters(None, state.configuration.components, channels)
        need = gates.discharge_requirement(step, [f.part_number for f in fitted])
        event = state.completed.get(step.id)
        served = "—"
        if event is not None and power_off is not None:
            seconds = (datetime.fromisoformat(event["received_at"])
                       - datetime.fromisoformat(power_off["received_at"])).total_seconds()
            served = gates.mmss(seconds)
        computed = "—"
        if need.computed_s is not None:
            row = ("" if need.capacitor_from in ("", exciter_rows.NOT_A_TABLE)
                   else f", capacitor data for {need.capacitor_from}")
            computed = (f"{gates.mmss(need.computed_s)} (bleed-down from "
                        f"{need.charge_voltage} to {need.safe_voltage}{row}; advisory)")
        energy = f"{need.energy_j:.1f} J at full charge" if need.energy_j is not None else "—"
        lines.append(DischargeLine(
            numbers[step.id], gates.mmss(need.required_s), gates.mmss(need.minimum_s),
            computed, energy,
            station_time(power_off["received_at"]) if power_off else "—",
            station_time(event["received_at"]) if event else "not yet served", served,
            who(event["person_id"]) if event else None))
    return lines


def ignition_entries(state: JobState, events: Sequence[Mapping[str, Any]],
                     numbers: Mapping[str, int], who: People) -> list[Entry]:
    lines = []
    for e in events:
        step = step_of(state, e["step_id"]) if e["step_id"] else None
        when, by = station_time(e["received_at"]), who(e["person_id"])
        if e["kind"] == "energised" and isinstance(step, IgnitionRun):
            lines.append(Entry("energised", by, when, numbers.get(step.id),
                               "A and B" if step.channel == "both" else step.channel))
        elif e["kind"] == "de_energised":
            lines.append(Entry("de-energised", by, when, None, e["data"].get("channel") or "all"))
        elif e["kind"] == "step_done" and isinstance(step, Check) and step.ignition_off:
            lines.append(Entry("de-energised (ignition selector off)", by, when,
                               numbers.get(step.id), "all"))
    return lines
