"""The trainer's room: the shop's procedure library, previewed as a mechanic sees it."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, abort, render_template

from ..domain.procedure_files import procedure_of_revision
from ..store import procedures as stored
from .common import db, requires

bp = Blueprint("procedures", __name__)


@bp.get("/procedures")
@requires("trainer", "supervisor")
def index() -> Any:
    revisions = stored.approved_revisions(db())
    entries = [(r, procedure_of_revision(r["hash"], r["content"])) for r in revisions]
    return render_template("procedures/index.html", entries=entries)


@bp.get("/procedures/<procedure_id>")
@requires("trainer", "supervisor")
def show(procedure_id: str) -> Any:
    revision = stored.approved_revision(db(), procedure_id)
    if revision is None:
        abort(404)
    procedure = procedure_of_revision(revision["hash"], revision["content"])
    return render_template("procedures/show.html", revision=revision, procedure=procedure)
