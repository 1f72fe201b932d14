"""The admin's room: the people enrolled on the station and their roles."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, render_template, request

from ..station.accounts import enrol
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


@bp.post("/people/<int:person_id>/revoke")
@requires("admin")
def revoke(person_id: int) -> Any:
    from flask import abort, redirect, url_for

    from .. import store

    if people.person_by_id(db(), person_id) is None:
        abort(404)
    with store.writing(db()):
        people.revoke(db(), person_id, now())
    return redirect(url_for("admin.people_page"), code=303)
