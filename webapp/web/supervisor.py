"""The supervisor's room: every job on the station and where each one stands."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, render_template

from .. import recording
from ..store import jobs as job_store
from ..store import people
from .common import db, requires

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
                           refusals=job_store.refusals(db(), job_id))
