"""Plug and exciter history across the fleet: gauged wear from the demo history and from jobs."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from sqlite_utils import Database

from .engines import latest_fit

# A plug where it is fitted now, or (removed) where it was last fitted: its history follows
# the serial, wherever it goes.
_PLUGS = (
    "select c.id as component_id, c.part_number, c.serial, c.type, "
    "coalesce(c.channel, m.channel) as channel, c.engine_id is not null as fitted, "
    "e.id as engine_id, e.serial as engine_serial, e.position, e.model as engine_model, "
    "a.id as aircraft_id, a.registration "
    "from components c left join part_moves m on m.id = (select max(id) from part_moves "
    "where component_id = c.id) "
    "join engines e on e.id = coalesce(c.engine_id, m.engine_id) "
    "join aircraft a on a.id = e.aircraft_id where c.kind = 'plug' ")

# Every inspection of a plug: the recorded history, and each wear reading a job recorded on
# it (the station puts the plug's id into the reading's data when the step is a wear step).
_POINTS = (
    "select component_id, measured_on, erosion_mm, null as result, engine_hours, starts, "
    "continuous_ignition_hours, continuous_ignition_estimated, source, null as job_id, "
    "null as verdict, null as value, null as unit, engine_id from plug_wear_history "
    "union all "
    "select json_extract(data, '$.plug.id'), substr(received_at, 1, 10), "
    "json_extract(data, '$.converted'), json_extract(data, '$.result'), "
    "json_extract(data, '$.usage.engine_hours'), json_extract(data, '$.usage.starts'), "
    "json_extract(data, '$.usage.continuous_ignition_hours'), "
    "json_extract(data, '$.usage.continuous_ignition_estimated'), 'job ' || job_id, job_id, "
    "json_extract(data, '$.verdict'), json_extract(data, '$.value'), "
    "json_extract(data, '$.unit'), (select engine_id from jobs where jobs.id = job_id) "
    "from events "
    "where kind = 'reading_recorded' and json_extract(data, '$.plug.id') is not null")


def _point(row: dict[str, Any]) -> dict[str, Any]:
    passed = {"pass": True, "fail": False}.get(row["result"]) if row["result"] else None
    return {**row, "passed": passed,
            "continuous_ignition_estimated": bool(row["continuous_ignition_estimated"])}


def _histories(db: Database, where: str, params: Sequence[Any]) -> list[dict]:
    plugs = {p["component_id"]: {**p, "points": []} for p in db.query(
        _PLUGS + where + " order by a.registration, e.position, c.channel", params)}
    if not plugs:
        return []
    marks = ",".join("?" * len(plugs))
    rows = db.query(f"select * from ({_POINTS}) where component_id in ({marks}) "
                    f"order by component_id, engine_hours, measured_on", list(plugs))
    for row in rows:
        plugs[row["component_id"]]["points"].append(_point(row))
    for plug in plugs.values():
        plug["fit"] = latest_fit(db, plug["component_id"])
    return list(plugs.values())


def plug_histories(db: Database) -> list[dict]:
    """Every installed plug with where it sits and its inspections, ordered by engine hours.

    Each plug: component_id, part_number, serial, type, channel, engine_id,
    engine_serial, position, engine_model, aircraft_id, registration, `points`
    (measured_on, erosion_mm, passed, engine_hours, starts, continuous_ignition_hours,
    continuous_ignition_estimated, source, job_id, verdict, value, unit, engine_id: the
    engine's totals when gauged) and `fit` (its latest fitting, `engines.latest_fit`).
    """
    return _histories(db, "and c.engine_id is not null", [])


def plug_history(db: Database, component_id: int) -> dict | None:
    """One plug's history as in `plug_histories` (fitted now or removed), or None."""
    found = _histories(db, "and c.id = ?", [component_id])
    return found[0] if found else None


def installed_exciters(db: Database, reading_procedures: Sequence[str]) -> list[dict]:
    """Every installed exciter with the latest reading of each number step that concerns it.

    A reading concerns an exciter when a job of one of `reading_procedures` recorded it on
    the exciter's engine, either on the exciter's channel or, in a job for both channels,
    on a step whose id ends with the channel's letter (input-current-a) or carries it
    before a suffix (input-voltage-a-ac). Readings are newest first, one per step.
    """
    exciters = {x["id"]: {**x, "readings": []} for x in db.query(
        "select c.*, e.serial as engine_serial, e.position, a.registration "
        "from components c join engines e on e.id = c.engine_id "
        "join aircraft a on a.id = e.aircraft_id where c.kind = 'exciter' "
        "order by a.registration, e.position, c.channel")}
    if not exciters or not reading_procedures:
        return list(exciters.values())
    marks = ",".join("?" * len(reading_procedures))
    rows = db.query(
        "select c.id as exciter_id, ev.step_id, ev.job_id, ev.received_at, j.procedure_id, "
        "json_extract(ev.data, '$.value') as value, json_extract(ev.data, '$.unit') as unit, "
        "json_extract(ev.data, '$.converted') as converted, "
        "json_extract(ev.data, '$.procedure_unit') as procedure_unit, "
        "json_extract(ev.data, '$.verdict') as verdict "
        "from events ev join jobs j on j.id = ev.job_id "
        "join components c on c.engine_id = j.engine_id and c.kind = 'exciter' "
        f"where ev.kind = 'reading_recorded' and j.procedure_id in ({marks}) "
        "and json_extract(ev.data, '$.converted') is not null "
        "and (j.channel = c.channel or (j.channel is null and "
        "(ev.step_id like '%-' || lower(c.channel) "
        "or ev.step_id like '%-' || lower(c.channel) || '-%'))) "
        # Only readings taken while this serial was the one fitted there (since its fitting,
        # when a job fitted it): a new exciter does not inherit its predecessor's readings.
        "and ev.received_at >= coalesce((select max(m.fitted_at) from part_moves m "
        "where m.component_id = c.id and m.engine_id = j.engine_id), '') "
        "order by ev.rowid desc", list(reading_procedures))
    seen: set[tuple[int, str]] = set()
    for row in rows:
        key = (row["exciter_id"], row["step_id"])
        if key not in seen:
            seen.add(key)
            exciters[row["exciter_id"]]["readings"].append(row)
    return list(exciters.values())
