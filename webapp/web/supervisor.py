"""The supervisor's room: every job, the review queue, certifying or returning a job."""

from __future__ import annotations

import uuid
from typing import Any

from flask import Blueprint, Response, abort, redirect, render_template, request, url_for

from ..domain.checks import job_progress
from ..domain.release import given_release, job_statement
from ..domain.signoff import amendable_fields, awaiting_review
from ..station import recording
from ..store import engines, people, signers
from ..store import jobs as job_store
from .common import authority, db, now, person, requires
from .sign_views import sign_view

bp = Blueprint("supervisor", __name__)


@bp.get("/jobs")
@requires("supervisor")
def jobs() -> Any:
    return render_template("supervisor/jobs.html", jobs=job_store.jobs(db()))


@bp.get("/jobs/<int:job_id>/log")
@requires("supervisor")
def job_log(job_id: int) -> Any:
    job = recording.load_job(db(), job_id)
    events = job_store.events(db(), job_id)
    names = people.names_by_id(db(), {e["person_id"] for e in events})
    return render_template("supervisor/job_log.html", job=job.row, state=job.state,
                           events=events, names=names,
                           refusals=job_store.refusals(db(), job_id),
                           records=[{**r, "record_id": _record_id(r["id"])}
                                    for r in signers.records_of(db(), job_id)])


def _record_id(stored_id: int) -> str | None:
    """The record id printed on a stored PDF (read from the file itself)."""
    from ..records.pdf import printed_record_id

    found = signers.record(db(), stored_id)
    return printed_record_id(found["pdf"]) if found else None


def _attention(state: Any) -> tuple[int, int]:
    """Out-of-limits readings and findings first (more of them, earlier in the queue)."""
    flagged = sum(1 for r in state.readings
                  if r.get("verdict") == "out of limits" or r.get("finding"))
    return (-flagged, 0)


@bp.get("/review")
@requires("supervisor")
def review_queue() -> Any:
    waiting = []
    for row in job_store.jobs(db(), status="open"):
        job = recording.load_job(db(), row["id"])
        if awaiting_review(job.state):
            flagged = [r for r in job.state.readings
                       if r.get("verdict") == "out of limits" or r.get("finding")]
            engine = engines.current(db(), row["engine_id"])
            waiting.append({"job": row, "state": job.state, "flagged": flagged,
                            "engine": engine,
                            "release": job_statement(job.state, engine, row["id"])[0]})
    waiting.sort(key=lambda w: (-len(w["flagged"]), w["job"]["id"]))
    return render_template("supervisor/review_queue.html", waiting=waiting)


def _review_page(job_id: int, error: str | None = None, status: int = 200) -> Any:
    from ..records.pdf import printed_record_id, record_html

    job = recording.load_job(db(), job_id)
    record = record_html(db(), job_id, now(), signatures=recording.signatures_of(job.state),
                         embedded=True, record_revision=recording.record_revision(job.state))
    certifying = job.state.next_step if awaiting_review(job.state) else None
    latest = signers.latest_record(db(), job_id)
    preview = (job_statement(job.state, engines.current(db(), job.row["engine_id"]), job_id)[0]
               if certifying else None)
    given = given_release(job.state)
    return render_template("supervisor/review.html", job=job.row, state=job.state,
                           preview=preview, given=given, progress=job_progress(job.state),
                           record=record, certifying=certifying, error=error,
                           sign=sign_view(db(), job.state, certifying, person(), now().date()),
                           latest=latest,
                           latest_id=printed_record_id(latest["pdf"]) if latest else None,
                           amendable=[(p, name, value) for p in job.state.steps
                                      if p.status == "done" and p.step.kind != "sign"
                                      for name, value in amendable_fields(job.state,
                                                                          p.id).items()]
                           if job.state.status == "complete" else [],
                           event_id=str(uuid.uuid4())), status


@bp.get("/review/<int:job_id>")
@requires("supervisor")
def review_job(job_id: int) -> Any:
    return _review_page(job_id)


@bp.post("/review/<int:job_id>")
@requires("supervisor")
def decide(job_id: int) -> Any:
    form = request.form
    action = form.get("action")
    if action == "certify":
        certifying = recording.load_job(db(), job_id).state.next_step
        kind, step_id = "signed", certifying.id if certifying else None
        data: dict[str, Any] = {"pin": form.get("pin", "")}
    elif action == "return":
        kind, step_id = "returned", None
        data = {"reason": form.get("reason", ""), "repeat_from": form.get("repeat_from") or None}
    elif action == "amend":
        target_step, _, target_field = form.get("target", "").partition("::")
        kind, step_id = "amendment", target_step or None
        data = {"field": target_field, "new": form.get("new", ""),
                "why": form.get("why", ""), "pin": form.get("pin", "")}
    else:
        abort(400, "Choose to certify or to return the job.")
    outcome = recording.record_event(db(), job_id, event_id=form.get("event_id") or
                                     str(uuid.uuid4()), kind=kind, step_id=step_id,
                                     data=data, device_time=None, person=person(), now=now(),
                                     authority=authority())
    if outcome.status == "refused":
        assert outcome.refusal is not None
        return _review_page(job_id, outcome.refusal.reason, 409)
    if outcome.status == "invalid":
        assert outcome.problem is not None
        return _review_page(job_id, outcome.problem.message, 422)
    # Post/redirect/get: reloading the page afterwards does not send the decision again.
    return redirect(url_for("supervisor.review_job", job_id=job_id), 303)


@bp.get("/jobs/<int:job_id>/record.pdf")
@requires("supervisor", "mechanic")
def record_pdf(job_id: int) -> Any:
    latest = signers.latest_record(db(), job_id)
    if latest is None:
        abort(404, "This job has no signed record yet.")
    return _pdf_answer(latest)


@bp.get("/jobs/<int:job_id>/records/<int:record_id>.pdf")
@requires("supervisor", "mechanic")
def record_file(job_id: int, record_id: int) -> Any:
    """Any signed state of a job's record, superseded ones included (never changed)."""
    found = signers.record(db(), record_id)
    if found is None or found["job_id"] != job_id:
        abort(404, "This job has no such record.")
    return _pdf_answer(found)


def _pdf_answer(record: dict[str, Any]) -> Response:
    """The PDF as stored; `?download=1` saves it instead of showing it."""
    how = "attachment" if request.args.get("download") else "inline"
    name = f"work-record-job-{record['job_id']}-r{record['revision']}-s{record['signatures']}.pdf"
    return Response(record["pdf"], mimetype="application/pdf",
                    headers={"Content-Disposition": f"{how}; filename={name}"})


@bp.route("/records/verify", methods=["GET", "POST"])
@requires("supervisor", "mechanic", "trainer", "admin")
def verify_page() -> Any:
    from ..records.verify import check_record, revocations

    result = error = None
    status = 200
    if request.method == "POST":
        upload = request.files.get("record")
        data = upload.read() if upload else b""
        if not data:
            error, status = "Choose the record's PDF file.", 422
        else:
            result = check_record(data, authority().cert,
                                  lambda job_id: job_store.events(db(), job_id),
                                  lambda job_id: signers.stored_states(db(), job_id),
                                  revocations(signers.revoked_signers(db())))
            status = 200 if result.intact else 422
    return render_template("supervisor/verify.html", result=result, error=error), status
