"""The fleet room: igniter plug wear and exciters per aircraft, engine and position."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from flask import Blueprint, abort, current_app, render_template
from flask.blueprints import BlueprintSetupState

from ..charts import wear_chart_svg
from ..domain import usage, wear
from ..domain.errors import RuleRefusal
from ..domain.parts import time_fitted
from ..domain.procedure_files import procedure_of_revision
from ..domain.procedures import Reading
from ..store import engines, procedures
from ..store import fleet as fleet_store
from ..store import wear as wear_store
from .common import db, requires

bp = Blueprint("fleet", __name__)

PLUG_PROCEDURE = "igniter-plug-replacement"
# Jobs whose number readings say something about the exciter of their channel.
EXCITER_READING_PROCEDURES = ("exciter-installation", "ignition-functional-check")
# Plug wear is tracked in engine hours (the engine's running time, not flight hours): the
# inspection interval is set in them.
USAGE_LABEL = usage.ENGINE_HOURS
DEFAULT_LIMIT_MM = 1.20       # demo data, invented (the demo plug procedure's limit)
DEFAULT_INTERVAL_FH = 200.0   # demo data, invented
URGENCY = {wear.REPLACE_NOW: 0, wear.BRING_FORWARD: 1, wear.OK: 2, wear.NOT_ENOUGH: 3}
FLAGGED = (wear.REPLACE_NOW, wear.BRING_FORWARD)


@bp.record_once
def _config_defaults(state: BlueprintSetupState) -> None:
    state.app.config.setdefault("WEAR_LIMIT_FALLBACK_MM", DEFAULT_LIMIT_MM)
    state.app.config.setdefault("INSPECTION_INTERVAL_FH", DEFAULT_INTERVAL_FH)


@dataclass(frozen=True)
class Limit:
    mm: float
    source: str


@dataclass(frozen=True)
class PlugWear:
    """One plug's history with its trend, verdict and chart."""

    plug: dict[str, Any]
    points: list[wear.WearPoint]
    fit: wear.WearFit
    forecast: wear.WearForecast
    svg: str
    basis: usage.WearBasis

    @property
    def last(self) -> dict[str, Any] | None:
        return self.plug["points"][-1] if self.plug["points"] else None

    @property
    def flagged(self) -> bool:
        return self.forecast.verdict in FLAGGED

    @property
    def verdict_class(self) -> str:
        return "verdict-" + self.forecast.verdict.replace(" ", "-").lower()


def erosion_limit() -> Limit:
    """The wear step's limit in the approved plug procedure, else the station's fallback."""
    revision = procedures.approved_revision(db(), PLUG_PROCEDURE)
    if revision is not None:
        procedure = procedure_of_revision(revision["hash"], revision["content"])
        for step in procedure.steps:
            if isinstance(step, Reading) and step.wear and step.limits and step.limits.max:
                source = procedure.source
                return Limit(step.limits.max, f"{procedure.title}, revision {revision['number']}"
                             f" ({source.document}, {source.section}, {source.revision})")
    return Limit(float(current_app.config.get("WEAR_LIMIT_FALLBACK_MM", DEFAULT_LIMIT_MM)),
                 "the station's fallback: no approved plug procedure gives a wear limit")


def _points(plug: dict[str, Any]) -> tuple[list[wear.WearPoint], usage.WearBasis]:
    """The plug's inspections as wear points, in engine hours since fitted where the fit is
    known (else the engine's totals), and that basis."""
    rows = [p for p in plug["points"] if p["engine_hours"] is not None]
    basis = usage.wear_basis(rows, plug.get("fit"))
    for p, since in zip(rows, basis.since, strict=True):
        p["since_fit"] = since   # for the history table
    return [wear.WearPoint(usage=basis.usage_of(i, float(p["engine_hours"])),
                           erosion_mm=p["erosion_mm"], passed=p["passed"],
                           estimated=p["continuous_ignition_estimated"])
            for i, p in enumerate(rows)], basis


def _title(plug: dict[str, Any]) -> str:
    return (f"{plug['registration']} engine {plug['position']} channel {plug['channel']} · "
            f"{plug['part_number']} S/N {plug['serial']}")


def assess(plugs: list[dict[str, Any]], limit: Limit, interval: float) -> list[PlugWear]:
    """Each plug's trend and verdict (the fleet pooled rate where its own history is short),
    most urgent first: replace now, bring inspection forward, then by margin."""
    histories = [(plug, *_points(plug)) for plug in plugs]
    fits = [wear.wear_rate(points) for _plug, points, _basis in histories]
    pooled = wear.pooled_rate(fits)
    assessed = []
    for (plug, points, basis), fit in zip(histories, fits, strict=True):
        usage_now = max((p.usage for p in points), default=0.0)
        try:
            outlook = wear.forecast(points, limit.mm, usage_now, interval, pooled,
                                    unit=USAGE_LABEL)
        except RuleRefusal as refusal:  # a history the forecast cannot use: say why
            outlook = wear.WearForecast(wear.NOT_ENOUGH, wear.SYMBOLS[wear.NOT_ENOUGH], None,
                                        None, None, None, wear.NO_RATE, refusal.reason)
        svg = wear_chart_svg(points, limit.mm, fit=None if fit.too_few else fit,
                             forecast=outlook, title=_title(plug), usage_label=basis.label)
        assessed.append(PlugWear(plug, points, fit, outlook, svg, basis))

    def urgency(p: PlugWear) -> tuple[int, float, str]:
        margin = p.forecast.margin
        return (URGENCY[p.forecast.verdict], math.inf if margin is None else margin,
                p.plug["serial"])
    return sorted(assessed, key=urgency)


def _interval() -> float:
    return float(current_app.config.get("INSPECTION_INTERVAL_FH", DEFAULT_INTERVAL_FH))


@bp.get("/fleet/wear", endpoint="wear")  # the function is not `wear`: the module is
@requires("mechanic", "supervisor", "trainer")
def wear_page() -> Any:
    limit = erosion_limit()
    plugs = assess(wear_store.plug_histories(db()), limit, _interval())
    exciters = {x["id"]: x for x in wear_store.installed_exciters(db(),
                                                                  EXCITER_READING_PROCEDURES)}
    return render_template("fleet/wear.html", aircraft=fleet_store.fleet(db()), limit=limit,
                           interval=_interval(), attention=[p for p in plugs if p.flagged],
                           by_id={p.plug["component_id"]: p for p in plugs},
                           exciters=exciters, usage_label=USAGE_LABEL)


@bp.get("/fleet/wear/plugs/<int:component_id>")
@requires("mechanic", "supervisor", "trainer")
def plug(component_id: int) -> Any:
    found = wear_store.plug_history(db(), component_id)
    if found is None:
        abort(404)
    limit = erosion_limit()
    # The pooled rate is the fleet's: assess every fitted plug (and this one, if it has come
    # off), then pick this one.
    histories = wear_store.plug_histories(db())
    if all(h["component_id"] != component_id for h in histories):
        histories.append(found)
    plugs = assess(histories, limit, _interval())
    this = next(p for p in plugs if p.plug["component_id"] == component_id)
    return render_template("fleet/plug.html", p=this, limit=limit, interval=_interval(),
                           usage_label=USAGE_LABEL, measures=usage_measures(this.plug))


@bp.get("/fleet/parts/<part_number>/<serial>")
@requires("mechanic", "supervisor", "trainer")
def part(part_number: str, serial: str) -> Any:
    """One serial's history: each engine and position it was fitted to, and for how long."""
    component = fleet_store.component_by_serial(db(), part_number, serial)
    if component is None:
        abort(404)
    moves = [{**m, "span": time_fitted(m["fitted_usage"], m["removed_usage"])}
             for m in engines.part_history(db(), component["id"])]
    if moves and moves[-1]["removed_job"] is None and component["engine_id"] is not None:
        # Still fitted: its usage so far runs to the engine's last entry of totals.
        last = engines.current(db(), component["engine_id"]).usage
        if last is not None:
            moves[-1]["span"] = usage.since_fit(last.totals(), moves[-1]["fitted_usage"])
            moves[-1]["span_to"] = last.said()
    where = engines.whereabouts(db(), component["kind"], serial)
    return render_template("fleet/part.html", component=component, moves=moves,
                           where=where)


MEASURE_LABELS = {"engine_hours": ("engine hours", 100, "per 100 engine hours"),
                  "starts": ("starts", 100, "per 100 starts"),
                  "continuous_ignition_hours": ("continuous-ignition hours", 10,
                                                "per 10 h of continuous ignition")}


def usage_measures(plug: dict[str, Any]) -> dict[str, Any]:
    """The plug's wear rate against each usage measure its history records, and which one
    explains the wear best (continuous ignition wears plugs faster than flying does)."""
    rows = [p for p in plug["points"] if p["erosion_mm"] is not None]
    fits = []
    for name, (label, per, said) in MEASURE_LABELS.items():
        points = [wear.WearPoint(usage=float(p[name]), erosion_mm=p["erosion_mm"])
                  for p in rows if p[name] is not None]
        fit = wear.wear_rate(points)
        fits.append({"name": name, "label": label, "per": per, "said": said, "fit": fit})
    history = {"erosion_mm": [p["erosion_mm"] for p in rows],
               **{name: [p[name] for p in rows] for name in MEASURE_LABELS
                  if all(p[name] is not None for p in rows)}}
    try:
        best = wear.best_usage_measure(history)
    except RuleRefusal:
        best = None
    return {"fits": fits, "best": best}
