"""The admin's room: the people enrolled on the station and their roles."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, render_template, request

from ..accounts import enrol
from ..store import people
from .common import authority, db, now, requires

bp = Blueprint("admin", __name__)


@bp.route("/people", methods=["GET", "POST"])
@requires("admin")
def people_page() -> Any:
    error = added = None
    status = 200
    if request.method == "POST":
        form = request.form
        try:
            added = enrol(db(), username=form.get("username", ""),
                          full_name=form.get("full_name", ""), roles=form.getlist("roles"),
                          password=form.get("password", ""),
                          authorisation=form.get("authorisation", "").strip() or None,
                          now=now(), pin=form.get("pin") or None, authority=authority())
        except ValueError as err:
            error, status = str(err).capitalize() + ".", 422
    return render_template("admin/people.html", people=people.all_people(db()),
                           roles=people.ROLES, error=error, added=added,
                           form=request.form if error else {}), status
