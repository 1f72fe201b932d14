"""The mechanic's room: fleet, engine, opening a job and working it step by step."""

from __future__ import annotations

import json
import uuid
from datetime import datetime
from typing import Any

from flask import Blueprint, abort, redirect, render_template, request, url_for

from ..domain.engine import PART_KINDS
from ..domain.gates import ON_LIMIT_WARNING_S
from ..domain.readings import InputProblem
from ..domain.release import given_release
from ..station import recording
from ..store import engines, people, signers
from ..store import fleet as fleet_store
from ..store import jobs as job_store
from .carry import carried_state
from .common import SUPERVISOR_EVENTS, authority, db, now, page_or_fragment, person, requires
from .gate_views import gate_context
from .input_guard import SQLITE_MAX_INT
from .reading_views import instrument_choices
from .sign_views import sign_view

bp = Blueprint("mechanic", __name__)


@bp.get("/fleet")
@requires("mechanic")
def fleet() -> Any:
    open_jobs = job_store.jobs(db(), status="open")
    mine = [j for j in open_jobs if j["opened_by"] == person().id]
    others = [j for j in open_jobs if j["opened_by"] != person().id]
    aircraft = fleet_store.fleet(db())
    states = {e["id"]: engines.current(db(), e["id"]) for a in aircraft for e in a["engines"]}
    return render_template("mechanic/fleet.html", aircraft=aircraft, states=states,
                           mine=mine, others=others)


@bp.get("/fleet/engines/<int:engine_id>")
@requires("mechanic")
def engine(engine_id: int) -> Any:
    found = fleet_store.engine(db(), engine_id)
    if found is None:
        abort(404)
    openable = recording.openable_procedures(db(), found)
    open_here = [j for j in job_store.jobs(db(), status="open") if j["engine_id"] == engine_id]
    state = engines.current(db(), engine_id)
    tags = state.tags
    names = people.names_by_id(db(), {t.owner_id for t in tags.values()})
    return render_template("mechanic/engine.html", engine=found, openable=openable,
                           state=state, part_kinds=PART_KINDS,
                           open_here=open_here, tags=sorted(tags.values(),
                                                            key=lambda t: t.breaker),
                           names=names)


@bp.post("/jobs")
@requires("mechanic")
def open_job() -> Any:
    try:
        engine_id = int(request.form["engine"])
    except (KeyError, ValueError):
        abort(400, "Choose an engine.")
    if not 0 < engine_id <= SQLITE_MAX_INT:
        abort(404, "No such engine in the fleet.")
    channel = request.form.get("channel") or None
    job_id = recording.open_job(db(), procedure_id=request.form.get("procedure", ""),
                                engine_id=engine_id, channel=channel, person=person(),
                                now=now())
    return redirect(url_for("mechanic.job", job_id=job_id), code=303)


def _job_page(job_id: int, error: str | None = None, status: int = 200,
              problem: InputProblem | None = None, entered: Any = None) -> Any:
    job = recording.load_job(db(), job_id)
    names = people.names_by_id(db(), {s.event["person_id"] for s in job.state.steps if s.event})
    gate = gate_context(db(), job, now())
    return page_or_fragment("mechanic/job.html", "mechanic/_job.html", status=status,
                            job=job.row, state=job.state, current=job.state.next_step,
                            names=names, error=error, gate=gate,
                            carry=carried_state(job, now(), gate, names),
                            warning_s=ON_LIMIT_WARNING_S, problem=problem,
                            entered=entered or {}, today=now().date().isoformat(),
                            station_now=now(), given_release=given_release(job.state),
                            sign=sign_view(db(), job.state, job.state.next_step, person(),
                                           now().date()),
                            **instrument_choices(db(), job.state.next_step, now().date()),
                            signed_record_id=_signed_record_id(job_id, job.state),
                            told=job_store.unread_notices(db(), job_id, person().id))


def _signed_record_id(job_id: int, state: Any) -> str | None:
    """The id printed on the job's signed PDF, for the screen that links to it (read only
    once the job is done: the link is shown then)."""
    if state.next_step is not None:
        return None
    from ..records.pdf import printed_record_id

    latest = signers.latest_record(db(), job_id)
    return printed_record_id(latest["pdf"]) if latest else None


@bp.get("/jobs/<int:job_id>")
@requires("mechanic", "supervisor")
def job(job_id: int) -> Any:
    return _job_page(job_id)


@bp.post("/jobs/<int:job_id>/notices/<int:refusal_id>/read")
@requires("mechanic", "supervisor")
def notice_read(job_id: int, refusal_id: int) -> Any:
    """The person told that another tablet's entry was refused (theirs came first) has
    read it."""
    if refusal_id > SQLITE_MAX_INT or job_store.job(db(), job_id) is None:
        abort(404)
    if not recording.notice_read(db(), job_id, refusal_id, person(), now()):
        abort(404, "No such notice for you on this job (it may have been read already).")
    if request.headers.get("HX-Request") == "true":
        return _job_page(job_id)
    return redirect(url_for("mechanic.job", job_id=job_id), code=303)


# The form fields each event kind may carry into its data (everything else is ignored).
def _event_data(kind: str, form: Any) -> dict[str, Any]:
    if kind == "step_done" and "items_offered" in form:
        # ASCII digits only: "²".isdigit() is true, and int("²") fails.
        return {"items": [int(i) for i in form.getlist("items")
                          if i.isascii() and i.isdigit() and len(i) <= 6]}
    if kind == "breaker_tagged":
        return {"breaker": form.get("breaker", ""), "tag": form.get("tag", "")}
    if kind == "tag_taken_over":
        return {"tag": form.get("tag", ""),
                "breaker_confirmed_open": form.get("breaker_confirmed_open") == "1"}
    if kind == "tag_removed":
        return {"tag": form.get("tag", "")}
    if kind in ("tag_handed_over", "tag_transfer_authorised", "tag_removal_authorised"):
        return _consent_data(kind, form)
    if kind == "item_closed":
        return {"item": form.get("item", ""), "how": form.get("how", "")}
    if kind == "de_energised" and form.get("channel"):
        return {"channel": form["channel"]}
    if kind == "reading_recorded":
        return _reading_data(form)
    if kind == "part_recorded":
        data = {k: form[k] for k in ("part_number", "serial", "status", "reason", "tag",
                                     "release", "condition") if k in form}
        data["usage"] = {k: form.get(k, "") for k in ("engine_hours", "starts",
                                                       "continuous_ignition_hours")}
        return data
    if kind == "signed":
        return {"pin": form.get("pin", "")}
    if kind == "amendment":
        return {k: form.get(k, "") for k in ("field", "new", "why", "pin")}
    if kind == "sparks_counted":
        return _count_data(form)
    if kind == "finding":
        return {k: form.get(k, "") for k in ("text", "disposition", "reference", "limit")
                if k in form}
    return {}


def _consent_data(kind: str, form: Any) -> dict[str, Any]:
    """A tag's hand-over or a supervisor's authorisation: the tag, the person picked (by id)
    and the reason where one is asked, with the PIN that proves who gives it."""
    data: dict[str, Any] = {"tag": form.get("tag", ""), "pin": form.get("pin", "")}
    if kind != "tag_removal_authorised":
        to = form.get("to", "")
        data["to"] = int(to) if to.isascii() and to.isdigit() else to
    if kind != "tag_handed_over":
        data["reason"] = form.get("reason", "")
    return data


def _count_data(form: Any) -> dict[str, Any]:
    """Taps arrive as a JSON list of seconds; a timed count as its number and window; both
    with the supply the exciter was at, and a combination unit's mode when the form asks."""
    supply = {k: form.get(f"supply_{k}", "") for k in ("voltage", "frequency")}
    mode = {"mode": form.get("mode", "")} if "mode" in form else {}
    if form.get("method") == "taps":
        try:
            taps = json.loads(form.get("taps", "[]"))
        except ValueError:
            taps = None
        return {"method": "taps", "taps": taps, "supply": supply, **mode,
                **_instrument_data(form)}
    try:
        window: Any = float(form.get("window_s", ""))
    except ValueError:
        window = form.get("window_s")
    return {"method": form.get("method"), "count": form.get("count", ""), "window_s": window,
            "supply": supply, **mode, **_instrument_data(form)}


def _instrument_data(form: Any) -> dict[str, Any]:
    """The instrument's ID: scanned or typed, else the one chosen from the register's list."""
    typed = form.get("instrument_id", "").strip()
    chosen = typed or form.get("instrument_pick", "").strip()
    return {"instrument_id": chosen} if chosen else {}


def _reading_data(form: Any) -> dict[str, Any]:
    """A reading form's fields as the event's data (the station checks and converts them)."""
    data: dict[str, Any] = {k: form[k] for k in ("text", "result", "value", "unit", "fastener")
                            if k in form}
    data.update(_instrument_data(form))
    for condition in ("test_voltage", "ambient_temperature", "humidity"):
        if f"{condition}_value" in form:
            data[condition] = {"value": form[f"{condition}_value"],
                               "unit": form.get(f"{condition}_unit", "%RH")}
    if form.get("wrench_length") or form.get("extension"):
        data["adapter"] = {"wrench_length": form.get("wrench_length", ""),
                           "extension": form.get("extension", ""), "angle": form.get("angle", "")}
    if "engine_hours" in form:
        data["usage"] = {k: form.get(k, "") for k in ("engine_hours", "starts",
                                                       "continuous_ignition_hours")}
        data["usage"]["continuous_ignition_estimated"] = (
            form.get("continuous_ignition_estimated") == "1")
    return data


def _device_time(text: str | None) -> str | None:
    if not text:
        return None
    try:
        moment = datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        abort(422, "The device's clock sent a time that is not a date and time.")
    if moment.tzinfo is None:
        abort(422, "The device's time came without its time zone.")
    return moment.isoformat()


@bp.post("/jobs/<int:job_id>/events")
@bp.post("/jobs/<int:job_id>/steps/<step_id>")
@requires("mechanic", "supervisor")
def record(job_id: int, step_id: str | None = None) -> Any:
    form = request.form
    if not person().has("mechanic") and form.get("kind") not in SUPERVISOR_EVENTS:
        abort(403, "Mechanics record the work; a supervisor signs it.")
    event_id = form.get("event_id", "")
    try:
        uuid.UUID(event_id)
    except ValueError:
        abort(400, "The form had no event id; reload the page.")
    kind = form.get("kind", "")
    outcome = recording.record_event(
        db(), job_id, event_id=event_id, kind=kind, step_id=step_id or form.get("step") or None,
        data=_event_data(kind, form), device_time=_device_time(form.get("device_time")),
        person=person(), now=now(), authority=authority(),
        device_sent=_device_time(form.get("sent_time")))
    if outcome.status == "invalid":
        assert outcome.problem is not None
        return _job_page(job_id, problem=outcome.problem, entered=form, status=422)
    if outcome.status == "refused":
        assert outcome.refusal is not None
        return _job_page(job_id, error=outcome.refusal.reason, status=409, entered=form)
    if request.headers.get("HX-Request") == "true":
        return _job_page(job_id)
    return redirect(url_for("mechanic.job", job_id=job_id), code=303)
