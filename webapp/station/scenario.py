"""The seeded demo loader: one function builds a scenario for the demo and for the tests."""

from __future__ import annotations

import random
from datetime import date, datetime, timedelta
from pathlib import Path
from typing import Any, Literal

import yaml
from pydantic import BaseModel, ConfigDict, Field

from .. import store
from ..records.identity import StationAuthority
from ..resources import shipped_dir
from ..store import engines, fleet, people
from . import instruments
from .accounts import enrol
from .authorising import authorise


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid")


class DemoAuthorisation(_Strict):
    signatures: list[str]
    scope: list[str]
    licence_kind: str
    licence_number: str
    expires_on: date


class DemoPerson(_Strict):
    username: str
    full_name: str
    roles: list[str] = Field(min_length=1)
    authorisation: str | None   # the staff number printed with their entries
    password: str
    pin: str | None = None
    authorisations: list[DemoAuthorisation] = Field(default_factory=list)  # what they sign


class DemoInstrument(_Strict):
    instrument_id: str
    kind: str
    range_low: float
    range_high: float
    range_unit: str
    calibration_due: date
    status: Literal["in service", "quarantined", "withdrawn"] = "in service"


class Part(_Strict):
    part_number: str
    type: str
    alternates: list[str] = Field(default_factory=list)  # interchangeable part numbers


class DemoEngine(_Strict):
    position: int
    serial: str


class DemoAircraft(_Strict):
    registration: str
    model: str
    exciter: Part
    plug: Part
    engines: list[DemoEngine] = Field(min_length=1)


class WearReading(_Strict):
    measured_on: date
    engine_hours: float
    starts: int
    continuous_ignition_hours: float
    erosion_mm: float


class FitUsage(_Strict):
    """The engine's totals when a plug was fitted (from the aircraft's records)."""

    engine_hours: float = Field(ge=0)
    starts: int = Field(ge=0)
    continuous_ignition_hours: float = Field(ge=0)


class PlugHistory(_Strict):
    engine: str
    channel: Literal["A", "B"]
    fitted_usage: FitUsage | None = None   # None: the fit's totals are not known
    readings: list[WearReading]


class OrdinaryWear(_Strict):
    mm_per_100_hours: float
    inspection_hours: list[float]
    continuous_ignition_estimated: bool
    fitted_usage: FitUsage | None = None


class Operator(_Strict):
    name: str
    approval: str


class Deferral(_Strict):
    """A reading out of limits at a step of a demo job, deferred with its reference and limit
    (an open item of the engine until a later job closes it)."""

    reading: dict[str, Any]
    text: str
    reference: str
    limit: str


class DemoJob(_Strict):
    """A job the demo starts with: opened and worked by `by`, up to the step `until` (not
    included; none: to the end), each sign step signed by the person named for it."""

    procedure: str
    engine: str                                  # engine serial number
    channel: Literal["A", "B"] | None = None     # for a one-channel procedure
    by: str                                      # username
    # when the walk started: within the two days the authority is valid before it is made
    hours_ago: float = Field(default=3, gt=0, le=40)
    until: str | None = None
    signers: dict[str, str] = Field(default_factory=dict)  # sign step id -> username
    workers: dict[str, str] = Field(default_factory=dict)  # step id -> username, if not `by`
    deferrals: dict[str, Deferral] = Field(default_factory=dict)  # step id -> its deferral


class Scenario(_Strict):
    name: str
    seed: int
    operator: Operator
    people: list[DemoPerson]
    instruments: list[DemoInstrument] = Field(default_factory=list)
    fleet: list[DemoAircraft]
    engine_model: str
    lead_part_numbers: dict[Literal["A", "B"], str]
    plug_history: list[PlugHistory]
    ordinary_wear: OrdinaryWear
    jobs: list[DemoJob] = Field(default_factory=list)


def scenario_path(name: str = "bramblecoast") -> Path:
    return shipped_dir("demo_scenarios") / f"{name}.yaml"


def read_scenario(path: Path) -> Scenario:
    return Scenario.model_validate(yaml.safe_load(path.read_text(encoding="utf-8")))


def load_scenario(db: store.Database, scenario: Scenario, now: datetime,
                  authority: StationAuthority | None = None) -> None:
    """Build the scenario into an empty station database, the same way every time.
    With the station's `authority`, people with a PIN get their signing keys."""
    rng = random.Random(scenario.seed)
    # The demo people are enrolled (their certificates issued) before the demo's first event,
    # so every signature of its history is made while the signer's certificate is valid.
    enrolled_at = now - timedelta(hours=max((j.hours_ago for j in scenario.jobs), default=0)
                                  + 1)
    for p in scenario.people:
        enrolled = enrol(db, username=p.username, full_name=p.full_name, roles=p.roles,
                         password=p.password, authorisation=p.authorisation, now=enrolled_at,
                         pin=p.pin if authority is not None else None, authority=authority)
        for a in p.authorisations:
            authorise(db, person_id=enrolled.id, signatures=a.signatures, scope=a.scope,
                      licence_kind=a.licence_kind, licence_number=a.licence_number,
                      expires_on=a.expires_on, granted_by=None, now=now)
    for i in scenario.instruments:
        instruments.add(db, **i.model_dump(exclude={"status"}), by=None, now=enrolled_at)
        if i.status != "in service":
            instruments.take_out(db, instrument_id=i.instrument_id, status=i.status, by=None,
                                 now=enrolled_at)
    explicit = {(h.engine, h.channel): h for h in scenario.plug_history}
    with store.writing(db):
        fleet.set_operator(db, scenario.operator.name, scenario.operator.approval)
        serial_number = 4400
        for aircraft in scenario.fleet:
            aircraft_id = fleet.add_aircraft(db, aircraft.registration, aircraft.model,
                                             scenario.operator.name)
            for e in aircraft.engines:
                engine_id = fleet.add_engine(db, aircraft_id, e.position, scenario.engine_model,
                                             e.serial)
                _allow_parts(db, engine_id, aircraft, scenario)
                for channel in ("A", "B"):
                    serial_number += 1
                    fitted = {"exciter": (aircraft.exciter.part_number, f"XE-{serial_number}",
                                          aircraft.exciter.type),
                              "lead": (scenario.lead_part_numbers[channel],
                                       f"XL-{serial_number}", "ht-lead"),
                              "plug": (aircraft.plug.part_number, f"XP-{serial_number}",
                                       aircraft.plug.type)}
                    history = explicit.get((e.serial, channel))
                    at_fit = (history.fitted_usage if history is not None
                              else scenario.ordinary_wear.fitted_usage)
                    ids = {}
                    for kind, (part_number, serial, type_) in fitted.items():
                        ids[kind] = fleet.add_component(db, kind=kind, part_number=part_number,
                                                        serial=serial, type=type_,
                                                        engine_id=engine_id, channel=channel)
                        engines.set_starting_part(
                            db, engine_id, kind, channel, ids[kind],
                            at_fit.model_dump() if kind == "plug" and at_fit else None)
                    plug_id = ids["plug"]
                    readings = (history.readings if history is not None
                                else _ordinary_wear(scenario.ordinary_wear, rng, now.date()))
                    for r in readings:
                        fleet.add_plug_wear(db, {
                            "component_id": plug_id, "engine_id": engine_id,
                            "channel": channel, "measured_on": r.measured_on.isoformat(),
                            "erosion_mm": r.erosion_mm, "engine_hours": r.engine_hours,
                            "starts": r.starts,
                            "continuous_ignition_hours": r.continuous_ignition_hours,
                            "continuous_ignition_estimated": int(
                                history is None
                                and scenario.ordinary_wear.continuous_ignition_estimated),
                            "source": "demo history"})


def _allow_parts(db: store.Database, engine_id: int, aircraft: DemoAircraft,
                 scenario: Scenario) -> None:
    """The fleet configuration: the part numbers each position may take."""
    for kind, part in (("exciter", aircraft.exciter), ("plug", aircraft.plug)):
        engines.allow_part(db, engine_id, kind, None, part.part_number, part.type)
        for alternate in part.alternates:
            engines.allow_part(db, engine_id, kind, None, alternate, part.type, "alternate")
    for channel, part_number in scenario.lead_part_numbers.items():
        engines.allow_part(db, engine_id, "lead", channel, part_number, "ht-lead")


def _ordinary_wear(wear: OrdinaryWear, rng: random.Random, today: date) -> list[WearReading]:
    """Slow, slightly noisy wear at the shop's inspection points (seeded, so repeatable)."""
    readings = []
    last = max(wear.inspection_hours)
    for hours in wear.inspection_hours:
        erosion = wear.mm_per_100_hours * hours / 100 * rng.uniform(0.85, 1.15)
        readings.append(WearReading(
            measured_on=today - timedelta(days=int((last - hours) * 0.45) + 14),
            engine_hours=hours, starts=int(hours * rng.uniform(0.85, 0.95)),
            continuous_ignition_hours=round(hours * 0.02, 1), erosion_mm=round(erosion, 3)))
    return readings


def load_demo_jobs(db: store.Database, scenario: Scenario, now: datetime,
                   authority: StationAuthority) -> list[int]:
    """Open and work the scenario's jobs through the station's recording path (needs the
    shop library loaded and the people enrolled with their PINs); returns the job ids."""
    from . import demo_jobs, recording

    engines = {e["serial"]: e["id"] for a in fleet.fleet(db) for e in a["engines"]}
    pins = {p.username: p.pin for p in scenario.people}

    def person(username: str) -> people.Person:
        found = people.person_by_username(db, username)
        if found is None:
            raise ValueError(f"demo job: no person '{username}' in the scenario")
        return found

    opened = []
    for job in scenario.jobs:
        if job.engine not in engines:
            raise ValueError(f"demo job: no engine '{job.engine}' in the scenario's fleet")
        start = now - timedelta(hours=job.hours_ago)
        job_id = recording.open_job(db, procedure_id=job.procedure, engine_id=engines[job.engine],
                                    channel=job.channel, person=person(job.by), now=start)
        demo_jobs.walk(db, job_id, by=person(job.by), now=start + demo_jobs.STEP_GAP,
                       until=job.until, authority=authority,
                       signers={step: demo_jobs.Signer(person(u), pins[u] or "")
                                for step, u in job.signers.items()},
                       workers={step: person(u) for step, u in job.workers.items()},
                       deferrals={step: d.model_dump() for step, d in job.deferrals.items()})
        opened.append(job_id)
    return opened


def demo_logins(scenario: Scenario) -> list[tuple[str, str, str, str]]:
    """(username, password, signing PIN, roles) for the demo's printed log-in list."""
    return [(p.username, p.password, p.pin or "-", ", ".join(p.roles))
            for p in scenario.people]


def is_empty(db: store.Database) -> bool:
    return not people.all_people(db) and not fleet.fleet(db)
