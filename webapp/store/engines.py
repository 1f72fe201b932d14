"""Each engine's state as kept beside the event log, and the fleet's part register it drives.

The state is the domain's fold (`domain.engine`) over the fleet's starting configuration
and the events of every job on the engine. The store keeps its current value, written in
the same transaction as each event that changes it, so no page or write replays a long
history; `replay` rebuilds it from the log (a test checks the two agree). Where each
serial is fitted (`components.engine_id`, `components.channel`) and each time a serial
was fitted and removed (`part_moves`) are written from the same events, never by hand.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from typing import Any

from sqlite_utils import Database

from ..domain.engine import (
    PART_LABELS,
    STATE_FORMAT,
    EngineState,
    apply_engine_event,
    clock_data,
    effects_of,
    engine_state,
    starting_state,
    state_as_data,
    state_of,
)
from ..domain.gates import TAG_EVENT_KINDS
from ..domain.parts import AllowedPart, Whereabouts
from . import new_row_id


def set_starting_part(db: Database, engine_id: int, kind: str, channel: str,
                      component_id: int, fitted_usage: Mapping[str, Any] | None = None) -> None:
    """Part of the fleet's starting configuration (the fleet loader's, before any job), with
    the engine's totals when it was fitted where the fleet's records give them."""
    db.table("installed_at_start").upsert({"engine_id": engine_id, "kind": kind,
                                           "channel": channel, "component_id": component_id,
                                           "fitted_usage": json.dumps(fitted_usage)
                                           if fitted_usage else None},
                                          pk=("engine_id", "kind", "channel"))


def allow_part(db: Database, engine_id: int, kind: str, channel: str | None, part_number: str,
               type: str, interchangeability: str = "approved") -> None:
    """A part number a position of the engine may take (the fleet configuration)."""
    db.table("allowed_parts").insert({"engine_id": engine_id, "kind": kind, "channel": channel,
                                      "part_number": part_number, "type": type,
                                      "interchangeability": interchangeability})


def allowed_parts(db: Database, engine_id: int) -> list[AllowedPart]:
    return [AllowedPart(r["kind"], r["channel"], r["part_number"], r["type"],
                        r["interchangeability"])
            for r in db.query("select * from allowed_parts where engine_id = ? "
                              "order by kind, channel, interchangeability, part_number",
                              [engine_id])]


def _starting_parts(db: Database, engine_id: int) -> list[dict[str, Any]]:
    return list(db.query(
        "select s.kind, s.channel, c.part_number, c.serial, c.type from installed_at_start s "
        "join components c on c.id = s.component_id where s.engine_id = ?", [engine_id]))


def replay(db: Database, engine_id: int) -> EngineState:
    """The engine's state rebuilt from its starting configuration and every event."""
    rows = db.query("select e.id, e.job_id, e.step_id, e.kind, e.data, e.person_id, "
                    "e.received_at, e.device_time from events e join jobs j on j.id = e.job_id "
                    "where j.engine_id = ? order by e.rowid", [engine_id])
    events = ({**r, "data": json.loads(r["data"])} for r in rows)
    return engine_state(starting_state(_starting_parts(db, engine_id)), events)


def current(db: Database, engine_id: int) -> EngineState:
    """The engine's state now: the kept value, or (first use) a replay, then kept."""
    rows = list(db.query("select state from engine_state where engine_id = ?", [engine_id]))
    kept = json.loads(rows[0]["state"]) if rows else None
    if kept is not None and kept.get("format") == STATE_FORMAT:
        return state_of(kept)
    state = replay(db, engine_id)
    _keep(db, engine_id, state)
    return state


def _keep(db: Database, engine_id: int, state: EngineState) -> None:
    rowid = next(db.query("select coalesce(max(e.rowid), 0) as n from events e join jobs j "
                          "on j.id = e.job_id where j.engine_id = ?", [engine_id]))["n"]
    db.table("engine_state").upsert({"engine_id": engine_id,
                                     "state": json.dumps(state_as_data(state), sort_keys=True),
                                     "event_rowid": rowid}, pk="engine_id")


def record_event_effects(db: Database, engine_id: int, before: EngineState,
                         event: Mapping[str, Any]) -> EngineState:
    """After an event is appended (same transaction): keep the engine's new state and move
    the parts it fitted or removed in the part register. `before` is the state the rules
    checked the event against."""
    effects = effects_of(event)
    if not effects and event.get("kind") not in TAG_EVENT_KINDS:
        return before
    after = apply_engine_event(before, event)
    _keep(db, engine_id, after)
    for effect in effects:
        if effect.get("effect") == "remove":
            _part_removed(db, engine_id, before, event, effect)
        elif effect.get("effect") == "install":
            _part_fitted(db, engine_id, event, effect)
    return after


def _part_removed(db: Database, engine_id: int, before: EngineState, event: Mapping[str, Any],
                  effect: Mapping[str, Any]) -> None:
    """The register's fitted part leaves the position. A plate that said otherwise (a
    mismatch, with its finding) is registered as removed from here too, unless the register
    has that serial fitted elsewhere: then the two records disagree, and the finding says
    so; the other engine's record is not changed from this one."""
    removal = {"removed_job": event["job_id"], "removed_at": event["received_at"],
               "removed_usage": json.dumps(effect.get("usage")),
               "status": effect["status"], "reason": effect["reason"], "tag": effect["tag"]}
    fitted = before.fitted(effect["kind"], effect["channel"])
    if fitted is not None:
        component = _component(db, effect["kind"], fitted.part_number, fitted.serial,
                               fitted.type)
        db.execute("update components set engine_id = null, channel = null where id = ?",
                   [component])
        _close_move(db, component, engine_id, effect, removal)
    if fitted is None or (fitted.part_number, fitted.serial) != (effect["part_number"],
                                                                  effect["serial"]):
        plate = _component(db, effect["kind"], effect["part_number"], effect["serial"], None)
        row = db.table("components").get(plate)
        if row["engine_id"] is None:
            _close_move(db, plate, engine_id, effect, removal)


def _close_move(db: Database, component: int, engine_id: int, effect: Mapping[str, Any],
                removal: dict[str, Any]) -> None:
    moves = list(db.query("select id from part_moves where component_id = ? and "
                          "removed_job is null order by id desc limit 1", [component]))
    if moves:
        db.table("part_moves").update(moves[0]["id"], removal)
    else:  # fitted since the starting configuration (or never registered as fitted)
        db.table("part_moves").insert({"component_id": component, "engine_id": engine_id,
                                       "kind": effect["kind"], "channel": effect["channel"],
                                       **removal})


def _part_fitted(db: Database, engine_id: int, event: Mapping[str, Any],
                 effect: Mapping[str, Any]) -> None:
    component = _component(db, effect["kind"], effect["part_number"], effect["serial"],
                           effect["type"])
    db.execute("update components set engine_id = ?, channel = ? where id = ?",
               [engine_id, effect["channel"], component])
    db.table("part_moves").insert({"component_id": component, "engine_id": engine_id,
                                   "kind": effect["kind"], "channel": effect["channel"],
                                   "fitted_job": event["job_id"],
                                   "fitted_at": event["received_at"],
                                   "fitted_usage": json.dumps(effect.get("usage"))})


def _component(db: Database, kind: str, part_number: str, serial: str,
               type: str | None) -> int:
    """The register's row for a part and serial number, made on first sight."""
    rows = list(db.query("select id from components where part_number = ? and serial = ?",
                         [part_number, serial]))
    if rows:
        return int(rows[0]["id"])
    return new_row_id(db.table("components").insert({
        "kind": kind, "part_number": part_number, "serial": serial,
        "type": type or "unknown", "engine_id": None, "channel": None}))


def whereabouts(db: Database, kind: str, serial: str) -> Whereabouts:
    """Where a serial of this kind of part is fitted in the fleet now, and its last removal."""
    fitted = list(db.query(
        "select a.registration, e.position, c.channel, c.part_number from components c "
        "join engines e on e.id = c.engine_id join aircraft a on a.id = e.aircraft_id "
        "where c.kind = ? and c.serial = ? limit 1", [kind, serial]))
    last = list(db.query(
        "select m.status, m.removed_job, m.engine_id from part_moves m join components c "
        "on c.id = m.component_id where c.kind = ? and c.serial = ? and m.removed_job is not "
        "null order by m.id desc limit 1", [kind, serial]))
    where = None
    if fitted:
        f = fitted[0]
        where = (f"{f['registration']} engine {f['position']}, channel {f['channel']} "
                 f"{PART_LABELS[kind]} ({f['part_number']})")
    clock = None
    if last and kind == "exciter":
        kept = current(db, last[0]["engine_id"]).clocks.get(serial)
        clock = clock_data(kept) if kept is not None else None
    return Whereabouts(where, last[0]["status"] if last else None,
                       last[0]["removed_job"] if last else None, clock)


def part_history(db: Database, component_id: int) -> list[dict[str, Any]]:
    """Where and when a serial was fitted and removed, with the engine's usage at each end.

    A serial of the fleet's starting configuration has its first fitting from there (no
    job; the engine's totals at the fit where the fleet's records give them), listed even
    while it is still fitted."""
    rows = [{**r, "fitted_usage": json.loads(r["fitted_usage"] or "null"),
             "removed_usage": json.loads(r["removed_usage"] or "null")} for r in db.query(
        "select m.*, a.registration, e.position, e.serial as engine_serial from part_moves m "
        "join engines e on e.id = m.engine_id join aircraft a on a.id = e.aircraft_id "
        "where m.component_id = ? order by m.id", [component_id])]
    start = starting_fit(db, component_id)
    if start is not None:
        first = next((r for r in rows if r["fitted_job"] is None
                      and r["engine_id"] == start["engine_id"]), None)
        if first is None:
            rows.insert(0, {**start, "fitted_job": None, "fitted_at": None, "removed_job": None,
                            "removed_at": None, "removed_usage": None})
        elif not first["fitted_usage"]:
            first["fitted_usage"] = start["fitted_usage"]
    return rows


def starting_fit(db: Database, component_id: int) -> dict[str, Any] | None:
    """Where the starting configuration had a serial fitted, and the engine's totals then."""
    rows = list(db.query(
        "select s.engine_id, s.kind, s.channel, s.fitted_usage, a.registration, e.position, "
        "e.serial as engine_serial from installed_at_start s join engines e on e.id = "
        "s.engine_id join aircraft a on a.id = e.aircraft_id where s.component_id = ?",
        [component_id]))
    if not rows:
        return None
    return {**rows[0], "fitted_usage": json.loads(rows[0]["fitted_usage"] or "null")}


def latest_fit(db: Database, component_id: int) -> dict[str, Any] | None:
    """The serial's latest fitting (by a job, else the starting configuration): the engine,
    when, by which job, and the engine's totals then (None where not recorded)."""
    moves = part_history(db, component_id)
    if not moves:
        return None
    last = moves[-1]
    return {"engine_id": last["engine_id"], "job": last["fitted_job"], "at": last["fitted_at"],
            "usage": last["fitted_usage"], "registration": last["registration"],
            "position": last["position"], "channel": last["channel"]}
