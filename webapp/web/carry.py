"""What a tablet carries of a job, to work on while the station cannot be reached.

Two parts. The job's steps for its configuration are fixed once the job is open (its pinned
revision, its exciter and plug types): the tablet fetches them once per job
(`GET /jobs/<id>/carry`), each with its heading and text rendered by the same template as
the station's page, whether the tablet may record it offline, and the data its offline form
needs. The job as the station knows it now (steps done, by whom and when, the tags hanging
on the engine) rides in every job page and fragment (`carried_state`), so each answer from
the station brings the tablet's copy up to date. The tablet's engine (static/js/
tablet_job.js) works on from both; the station checks every entry again when it arrives,
and its answer wins.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any

from flask import Blueprint, jsonify, render_template, url_for

from ..domain import exciter_rows, gates, isolation
from ..domain import torque as torque_rules
from ..domain.execution import JobState, StepProgress
from ..domain.placement import COUNTED_WAIT_MARGIN_S
from ..domain.procedures import (
    Advisory,
    Check,
    DischargeWait,
    Lockout,
    PartChange,
    Reading,
    Step,
    Torque,
)
from ..station import recording
from ..store import instruments as instrument_store
from ..store import people
from . import carry_steps
from .common import db, now, person, requires

bp = Blueprint("carry", __name__)

# Why a step kind waits for the station, in the mechanic's words. Every kind not named in
# `_offline` is one of these; the screen shows the reason on the tablet.
NEEDS_STATION = {
    "spark_count": "A spark count is timed and judged by the station.",
    "ignition_run": "Energising is held to the exciter's duty cycle by the station's clock.",
    "sign": "A signature needs the station itself: your PIN is never kept on the tablet.",
    "release": "Taking tags off is checked against every job on the engine by the station.",
}


def _offline(step: Step) -> str | None:
    """None when the tablet may record `step` away from the station, else why not."""
    if isinstance(step, Advisory):
        return None
    if isinstance(step, Check):
        return None  # lead handling too: its grounding and isolation rules are mirrored
    if isinstance(step, Reading):
        return carry_steps.reading_offline(step)
    if isinstance(step, PartChange):
        return carry_steps.part_offline(step)
    if isinstance(step, Torque):
        return None
    if isinstance(step, Lockout):
        return None if step.action == "apply" else NEEDS_STATION["release"]
    if isinstance(step, DischargeWait):
        return None
    return NEEDS_STATION.get(step.kind, "This step needs the station.")


def _form_data(step: Step, register: list[Any], today: Any) -> dict[str, Any]:
    """What the tablet's offline form for `step` needs beyond its heading and text."""
    rules = carry_steps.lead_rules(step)  # domain/isolation.py's reading of every step
    if isinstance(step, Check):
        return {**rules, "items": list(step.items or []), "power": step.power,
                "ignition_off": step.ignition_off,
                "opens_item": step.opens_item.text if step.opens_item else None}
    if isinstance(step, Reading):
        return {**rules, **carry_steps.reading_form(step, register, today)}
    if isinstance(step, PartChange):
        return {**rules, **carry_steps.part_form(step)}
    if isinstance(step, Torque):
        return {**rules, **carry_steps.torque_form(step, register, today)}
    if isinstance(step, Lockout):
        return {"action": step.action, "confirm_existing": step.confirm_existing,
                "breakers": [{"id": b.id, "label": b.label} for b in step.breakers]}
    return rules


def carried_steps(job_id: int) -> dict[str, Any]:
    job = recording.load_job(db(), job_id)
    state = job.state
    register = instrument_store.all_instruments(db())
    today = now().date()
    steps = []
    for progress in state.steps:
        step = progress.step
        why_not = _offline(step)
        steps.append({
            "id": step.id, "kind": step.kind, "number": progress.number,
            "offline": why_not is None, "needs_station": why_not,
            "head": render_template("mechanic/_step_head.html", current=progress,
                                    step=step, state=state),
            **_form_data(step, register, today)})
    return {"job_id": job_id, "revision": job.row["revision_hash"],
            "record_url": url_for("mechanic.record", job_id=job_id),
            # The register's instruments are as of this day: a later page fetches them again.
            "carried_on": today.isoformat(),
            "grounding_valid_s": isolation.GROUNDING_VALID_S,
            "grounding_step": next((s.id for s in state.applicable
                                    if isolation.is_grounding(s)), None),
            "channel": state.configuration.channel, "steps": steps}


@bp.get("/jobs/<int:job_id>/carry")
@requires("mechanic", "supervisor")
def job_steps(job_id: int) -> Any:
    """The job's steps for the tablet (fixed for the job's life: the tablet keeps them)."""
    return jsonify(carried_steps(job_id))


def _tags(gate: dict[str, Any], job_id: int, me: int) -> list[dict[str, Any]]:
    """The tags hanging on the engine, with what the tablet's tag rules word refusals with
    (domain/entry_conflicts.py: whose tag, who hung it and when, on which job)."""
    views = gate["tag_list"]
    names = people.names_by_id(db(), {v.tag.applied_by for v in views}
                               | {v.tag.owner_id for v in views})
    return [{"breaker": v.tag.breaker, "number": v.tag.number,
             "owner": names.get(v.tag.owner_id, "another person"),
             "mine": v.tag.owner_id == me, "counts_here": v.counts_here,
             "this_job": v.tag.job_id == job_id, "job_id": v.tag.job_id,
             "applied_by": names.get(v.tag.applied_by, "another person"),
             "applied_by_me": v.tag.applied_by == me, "applied_at": v.tag.applied_at}
            for v in views]


def _channels(state: JobState) -> list[str]:
    return [state.configuration.channel] if state.configuration.channel else ["A", "B"]


def _discharge_waits(state: JobState, gate: dict[str, Any]) -> dict[str, float]:
    """Seconds each discharge wait still to do asks, for the exciters fitted now."""
    channels = [state.configuration.channel] if state.configuration.channel else ["A", "B"]
    fitted = exciter_rows.fitted_exciters(gate["engine"], state.configuration.components,
                                          channels)
    parts = [f.part_number for f in fitted]
    return {s.id: gates.discharge_requirement(s.step, parts).required_s
            for s in state.steps if isinstance(s.step, DischargeWait) and s.status != "done"}


def carried_state(job: recording.Job, station_now: datetime, gate: dict[str, Any],
                  names: dict[int, str]) -> dict[str, Any]:
    """The job as the station knows it at `station_now`, for the tablet's copy."""
    state: JobState = job.state
    me = person()

    def done(progress: StepProgress) -> dict[str, Any]:
        event = progress.event or {}
        return {"event_id": event.get("id"), "kind": event.get("kind"),
                "by": names.get(event.get("person_id", 0), "?"),
                "at": event.get("received_at")}

    nxt = state.next_step
    return {
        "format": 1, "job_id": job.row["id"], "revision": job.row["revision_hash"],
        "head": {"seq": job.head.get("seq"), "hash": job.head.get("hash")},
        "station_time": station_now.isoformat(), "person_id": me.id,
        "status": state.status, "next": nxt.id if nxt else None,
        "completed": {s.id: done(s) for s in state.steps if s.status == "done"},
        "awaiting_finding": sorted(state.awaiting_finding),
        "power_off": state.power_off.station.isoformat() if state.power_off else None,
        "power_off_device": (state.power_off.device.isoformat()
                             if state.power_off and state.power_off.device else None),
        # The discharge wait the station asks now (the fitted exciters' data), and what a
        # wait counted by the tablet's clock asks on top (domain/placement.py).
        "discharge": _discharge_waits(state, gate),
        "counted_margin_s": COUNTED_WAIT_MARGIN_S,
        # When the lead was last grounded (domain/isolation.py), by both clocks, and whether
        # an isolation check stands verified: the tablet's lead rules start from these.
        "lead_grounded": (state.lead_grounded.station.isoformat()
                          if state.lead_grounded else None),
        "lead_grounded_device": (state.lead_grounded.device.isoformat()
                                 if state.lead_grounded and state.lead_grounded.device
                                 else None),
        "isolation_verified": state.isolation_verified,
        # Each torque step's fasteners whose latest reading stands (domain/torque.py).
        "fasteners_done": {s.id: sorted(torque_rules.accepted_fasteners(s.step, state.readings))
                           for s in state.steps if isinstance(s.step, Torque)},
        "fitted": carry_steps.fitted_parts(gate.get("engine"), _channels(state)),
        "tags": _tags(gate, job.row["id"], me.id),
    }
