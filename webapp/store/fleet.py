"""The operator's fleet: aircraft, engines and the ignition components installed on them."""

from __future__ import annotations

from sqlite_utils import Database

from . import new_row_id


def set_operator(db: Database, name: str, approval: str) -> None:
    """The maintenance organisation's name and approval reference (for records)."""
    db.table("settings").upsert_all([{"key": "operator_name", "value": name},
                               {"key": "operator_approval", "value": approval}], pk="key")


def settings(db: Database) -> dict[str, str]:
    """The station's settings (operator name, approval reference) as key -> value."""
    return {row["key"]: row["value"] for row in db.table("settings").rows}


def add_aircraft(db: Database, registration: str, model: str, operator: str) -> int:
    row = {"registration": registration, "model": model, "operator": operator}
    return new_row_id(db.table("aircraft").insert(row))


def add_engine(db: Database, aircraft_id: int, position: int, model: str, serial: str) -> int:
    row = {"aircraft_id": aircraft_id, "position": position, "model": model, "serial": serial}
    return new_row_id(db.table("engines").insert(row))


def add_component(db: Database, *, kind: str, part_number: str, serial: str, type: str,
                  engine_id: int | None, channel: str | None) -> int:
    return new_row_id(db.table("components").insert({
        "kind": kind, "part_number": part_number, "serial": serial, "type": type,
        "engine_id": engine_id, "channel": channel}))


def add_plug_wear(db: Database, record: dict) -> None:
    db.table("plug_wear_history").insert(record)


def component_by_serial(db: Database, part_number: str, serial: str) -> dict | None:
    rows = list(db.table("components").rows_where("part_number = ? and serial = ?",
                                            [part_number, serial], limit=1))
    return rows[0] if rows else None


def fleet(db: Database) -> list[dict]:
    """Every aircraft with its engines (by position) and their installed components."""
    aircraft = {a["id"]: {**a, "engines": []}
                for a in db.table("aircraft").rows_where(order_by="registration")}
    engines = {}
    for e in db.table("engines").rows_where(order_by="aircraft_id, position"):
        engine = {**e, "components": []}
        engines[e["id"]] = engine
        aircraft[e["aircraft_id"]]["engines"].append(engine)
    for c in db.table("components").rows_where("engine_id is not null",
                                         order_by="engine_id, channel, kind"):
        engines[c["engine_id"]]["components"].append(c)
    return list(aircraft.values())


def engine(db: Database, engine_id: int) -> dict | None:
    """One engine with its aircraft and installed components, or None."""
    rows = list(db.query(
        "select e.*, a.registration, a.model as aircraft_model, a.operator "
        "from engines e join aircraft a on a.id = e.aircraft_id where e.id = ?", [engine_id]))
    if not rows:
        return None
    found = rows[0]
    found["components"] = list(db.table("components").rows_where(
        "engine_id = ?", [engine_id], order_by="channel, kind"))
    return found
