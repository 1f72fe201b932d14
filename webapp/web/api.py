"""The JSON API (session cookie + X-CSRFToken): fleet, jobs and their events.

The tablet's offline outbox replays events through `POST /api/jobs/<id>/events`;
the same UUID delivered twice is stored once and answered the same.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any, Literal
from uuid import UUID

from flask import Blueprint, current_app, jsonify, request, url_for
from pydantic import AwareDatetime, BaseModel, ConfigDict, Field, ValidationError

from ..domain.checks import job_progress
from ..domain.engine import EngineState
from ..domain.execution import CLIENT_EVENT_KINDS, JobState, StepProgress
from ..domain.gates import ChannelClock
from ..domain.procedures import Check, Lockout, Reading, Torque
from ..station import recording
from ..store import engines
from ..store import fleet as fleet_store
from .common import SUPERVISOR_EVENTS, authority, db, now, person, public, requires
from .input_guard import SQLITE_MAX_INT, InputRefused
from .openapi import openapi_document

bp = Blueprint("api", __name__)

EventKind = Literal[CLIENT_EVENT_KINDS]  # type: ignore[valid-type]


class JobIn(BaseModel):
    model_config = ConfigDict(extra="forbid")
    procedure: str = Field(min_length=1)
    engine: int = Field(ge=1, le=SQLITE_MAX_INT)
    channel: Literal["A", "B"] | None = None


class EventIn(BaseModel):
    model_config = ConfigDict(extra="forbid")
    id: UUID
    kind: EventKind
    step: str | None = None
    data: dict[str, Any] = Field(default_factory=dict)
    device_time: AwareDatetime | None = None
    # For an entry that waited on the device: its clock when it sent it (placement.py).
    sent_time: AwareDatetime | None = None


def _malformed(err: ValidationError) -> Any:
    problems = [{"field": ".".join(str(p) for p in e["loc"]) or "(body)", "problem": e["msg"]}
                for e in err.errors()]
    return jsonify({"rule": "malformed", "reason": "The request was not understood; nothing "
                    "was stored.", "problems": problems}), 422


def _body(model: type[BaseModel]) -> BaseModel:
    """The request's JSON body as `model`; InputRefused (400) when it is not JSON at all."""
    payload = None
    if request.is_json:
        try:
            payload = current_app.json.loads(request.get_data(cache=True))
        except InputRefused:
            raise
        except ValueError as err:  # not JSON, not UTF-8, or NaN / Infinity
            raise InputRefused("(body)", f"The body is not valid JSON: {str(err)[:120]}."
                               ) from None
    if not isinstance(payload, dict):
        raise ValidationError.from_exception_data("body", [
            {"type": "model_type", "loc": (), "input": payload,
             "ctx": {"class_name": model.__name__}}])
    return model.model_validate(payload)


def event_json(event: dict[str, Any]) -> dict[str, Any]:
    return {"id": event["id"], "job": event["job_id"], "seq": event["seq"],
            "step": event["step_id"], "kind": event["kind"], "data": event["data"],
            "person": event["person_id"], "device_time": event["device_time"],
            "device_sent": event.get("device_sent"),
            "received_at": event["received_at"], "prev_hash": event["prev_hash"],
            "hash": event["hash"]}


def _step_json(progress: StepProgress) -> dict[str, Any]:
    step = progress.step
    shown: dict[str, Any] = {"id": progress.id, "number": progress.number, "kind": step.kind,
                             "text": step.text, "status": progress.status,
                             "recordable": progress.recordable}
    if isinstance(step, Check) and step.items:
        shown["items"] = list(step.items)
    if isinstance(step, Lockout):
        shown["action"] = step.action
        shown["breakers"] = [b.id for b in step.breakers]
    if isinstance(step, (Reading, Torque)):
        shown["value"] = step.value if isinstance(step, Reading) else "number"
        shown["unit"] = step.unit
        shown["limits"] = step.limits.model_dump() if step.limits else None
        shown["conditions"] = list(step.conditions) if isinstance(step, Reading) else []
        shown["wear"] = isinstance(step, Reading) and step.wear
        shown["adapter"] = isinstance(step, Torque) and step.adapter
    return shown


def _clock_json(clock: ChannelClock, at: datetime) -> dict[str, Any]:
    return {"on": clock.is_on, "on_for_s": round(clock.on_for_s(at), 1),
            "on_limit_s": clock.on_limit_s,
            "on_remaining_s": (None if clock.on_remaining_s(at) is None
                               else round(clock.on_remaining_s(at) or 0.0, 1)),
            "next_on_allowed_in_s": round(clock.off_remaining_s(at), 1),
            "runs": clock.runs, "overrun_s": round(clock.overrun_s, 1)}


def job_json(row: dict[str, Any], state: JobState) -> dict[str, Any]:
    upcoming = state.next_step
    now_ = now()
    return {
        "id": row["id"], "status": state.status, "procedure": row["procedure_id"],
        "procedure_title": row["procedure_title"], "revision": row["revision_hash"],
        "revision_number": row["revision_number"], "engine": row["engine_id"],
        "engine_serial": row["engine_serial"], "aircraft": row["registration"],
        "position": row["position"], "channel": row["channel"],
        "steps": [_step_json(s) for s in state.steps],
        "done": [s.id for s in state.steps if s.status == "done"],
        "next_step": upcoming.id if upcoming else None,
        "readings": list(state.readings),
        "awaiting_finding": sorted(state.awaiting_finding),
        "ignition": {channel: _clock_json(clock, now_) for channel, clock in state.clocks.items()},
        "progress": job_progress(state),
        "engine_state": _engine_json(engines.current(db(), row["engine_id"]), now_),
        "url": url_for("mechanic.job", job_id=row["id"]),
    }


def _engine_json(engine: EngineState, at: datetime) -> dict[str, Any]:
    return {"not_whole": {c: engine.not_whole(c) for c in ("A", "B")},
            "exciter_clocks": {c: _clock_json(clock, at)
                               for c, clock in engine.channel_clocks().items()},
            "checks_due": [d.said() for d in engine.checks_due],
            "open_items": [{"id": i.id, "reference": i.reference, "text": i.text,
                            "limit": i.limit, "job": i.job_id} for i in engine.open_items]}


@bp.get("/healthz")
@public
def healthz() -> Any:
    row = next(db().query("select count(*) as n from procedure_revisions "
                          "where status = 'approved'"))
    return jsonify({"status": "ok", "approved_procedures": row["n"],
                    "time": now().isoformat()})


@bp.get("/api/openapi.json")
@public
def openapi() -> Any:
    return jsonify(openapi_document(JobIn, EventIn,
                                    current_app.config["SESSION_COOKIE_NAME"]))


@bp.get("/api/fleet")
@requires("mechanic", "supervisor", "trainer", "admin")
def fleet() -> Any:
    return jsonify({"aircraft": [
        {"id": a["id"], "registration": a["registration"], "model": a["model"],
         "engines": [{"id": e["id"], "serial": e["serial"], "model": e["model"],
                      "position": e["position"],
                      "components": [{"kind": c["kind"], "part_number": c["part_number"],
                                      "serial": c["serial"], "type": c["type"],
                                      "channel": c["channel"]} for c in e["components"]]}
                     for e in a["engines"]]}
        for a in fleet_store.fleet(db())]})


@bp.post("/api/jobs")
@requires("mechanic")
def open_job() -> Any:
    try:
        body = _body(JobIn)
    except ValidationError as err:
        return _malformed(err)
    assert isinstance(body, JobIn)
    job_id = recording.open_job(db(), procedure_id=body.procedure, engine_id=body.engine,
                                channel=body.channel, person=person(), now=now())
    job = recording.load_job(db(), job_id)
    return jsonify(job_json(job.row, job.state)), 201


@bp.get("/api/jobs/<int:job_id>")
@requires("mechanic", "supervisor")
def job(job_id: int) -> Any:
    found = recording.load_job(db(), job_id)
    return jsonify(job_json(found.row, found.state))


@bp.post("/api/jobs/<int:job_id>/events")
@requires("mechanic", "supervisor")
def post_event(job_id: int) -> Any:
    try:
        body = _body(EventIn)
    except ValidationError as err:
        return _malformed(err)
    assert isinstance(body, EventIn)
    if not person().has("mechanic") and body.kind not in SUPERVISOR_EVENTS:
        return jsonify({"rule": "http_403", "reason": "Mechanics record the work; a "
                        "supervisor signs it."}), 403
    device_time = body.device_time.isoformat() if isinstance(body.device_time, datetime) else None
    outcome = recording.record_event(db(), job_id, event_id=str(body.id), kind=body.kind,
                                     step_id=body.step, data=body.data,
                                     device_time=device_time, person=person(), now=now(),
                                     authority=authority(),
                                     device_sent=(body.sent_time.isoformat()
                                                  if body.sent_time else None))
    if outcome.status == "invalid":
        assert outcome.problem is not None
        return jsonify({"rule": "bad_input", "reason": outcome.problem.message + " Nothing "
                        "was stored.", "problems": [{"field": f"data.{outcome.problem.field}",
                                                     "problem": outcome.problem.message}]}), 422
    if outcome.status == "refused":
        assert outcome.refusal is not None
        refused = outcome.refusal.as_dict()
        if outcome.event is not None:  # an id used before: what it stands for
            refused["event"] = event_json(outcome.event)
        return jsonify(refused), 409
    assert outcome.event is not None
    return jsonify(event_json(outcome.event)), 201 if outcome.status == "stored" else 200
