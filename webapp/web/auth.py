"""Log-in and log-out, and the home page that sends each role to its room."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, current_app, redirect, render_template, request, session, url_for

from ..station.accounts import LoginRefused, log_in
from .common import db, now, public, requires

bp = Blueprint("auth", __name__)

HOME_BY_ROLE = (("mechanic", "mechanic.fleet"), ("supervisor", "supervisor.review_queue"),
                ("trainer", "procedures.index"), ("admin", "admin.people_page"))


@bp.get("/")
@requires("mechanic", "supervisor", "trainer", "admin")
def home() -> Any:
    from flask import g

    for role, endpoint in HOME_BY_ROLE:
        if g.person.has(role):
            return redirect(url_for(endpoint))
    return redirect(url_for("auth.login"))


@bp.route("/login", methods=["GET", "POST"])
@public
def login() -> Any:
    error = None
    if request.method == "POST":
        try:
            found = log_in(db(), request.form.get("username", ""),
                           request.form.get("password", ""), now=now(),
                           max_failures=current_app.config["LOGIN_MAX_FAILURES"],
                           lock_minutes=current_app.config["LOGIN_LOCK_MINUTES"])
        except LoginRefused as refused:
            error = str(refused)
        else:
            session.clear()
            session["person_id"] = found.id
            session.permanent = True
            target = request.args.get("next", "")
            # Only a path on this station, never another site.
            if not target.startswith("/") or target.startswith("//"):
                target = url_for("auth.home")
            return redirect(target, code=303)
    status = 401 if error else 200
    return render_template("auth/login.html", error=error,
                           username=request.form.get("username", "")), status


@bp.post("/logout")
@public
def logout() -> Any:
    session.clear()
    return redirect(url_for("auth.login"), code=303)
