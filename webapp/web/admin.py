"""The admin's room: the people enrolled on the station, their roles and what they sign, their
sessions and log-in waits; the register of calibrated instruments."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, abort, current_app, redirect, render_template, request, url_for

from ..domain.authorisations import PROCEDURE_KINDS, SIGNATURE_KINDS
from ..domain.instruments import INSTRUMENT_KINDS
from ..domain.readings import InputProblem
from ..station import instruments as keeping
from ..station.accounts import end_sessions, enrol, lift_wait, login_waits, revoke_access
from ..station.authorising import authorise, withdraw
from ..store import authorisations, people, sessions
from ..store import instruments as instrument_register
from ..store.job_states import NotFound
from .common import authority, db, now, person, requires, session_limits, throttle_policy

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
    limits, policy = session_limits(current_app), throttle_policy(current_app)
    open_sessions = sessions.open_sessions_by_person(
        db(), created_since=now() - limits.absolute, seen_since=now() - limits.idle)
    return render_template("admin/people.html", people=people.all_people(db()),
                           roles=people.ROLES, error=error, added=added,
                           form=request.form if error else {}, open_sessions=open_sessions,
                           waits=login_waits(db(), now(), policy),
                           policy=policy), status


@bp.post("/people/<int:person_id>/revoke")
@requires("admin")
def revoke(person_id: int) -> Any:
    if people.person_by_id(db(), person_id) is None:
        abort(404)
    revoke_access(db(), person_id, now())
    return redirect(url_for("admin.people_page"), code=303)


@bp.post("/people/<int:person_id>/sessions/end")
@requires("admin")
def end_person_sessions(person_id: int) -> Any:
    """Log a person out everywhere (a lost tablet, a shared password)."""
    if people.person_by_id(db(), person_id) is None:
        abort(404)
    end_sessions(db(), person_id, now(), f"ended by {person().username}")
    return redirect(url_for("admin.people_page", _anchor="sessions"), code=303)


@bp.post("/login-waits/lift")
@requires("admin")
def lift_login_wait() -> Any:
    """Clear the failed log-ins behind one wait (they stay in the log, marked lifted)."""
    scope = request.form.get("scope", "")
    if scope not in ("pair", "name", "address"):
        abort(400, "scope: one of pair, name, address")
    username, address = request.form.get("username", ""), request.form.get("address", "")
    if scope in ("pair", "name") and not username:
        abort(400, "username: needed to lift a wait on a name")
    if scope in ("pair", "address") and not address:
        abort(400, "address: needed to lift a wait on an address")
    lift_wait(db(), scope=scope, username=username, address=address, now=now(), by=person())
    return redirect(url_for("admin.people_page", _anchor="login-waits"), code=303)


@bp.route("/people/<int:person_id>/authorisations", methods=["GET", "POST"])
@requires("admin")
def authorisations_page(person_id: int) -> Any:
    """A person's authorisations (revoked and expired ones too), and granting a new one."""
    who = people.person_by_id(db(), person_id)
    if who is None:
        abort(404)
    problem = None
    if request.method == "POST":
        form = request.form
        try:
            authorise(db(), person_id=person_id, signatures=form.getlist("signatures"),
                      scope=form.get("scope", ""), licence_kind=form.get("licence_kind", ""),
                      licence_number=form.get("licence_number", ""),
                      expires_on=form.get("expires_on", ""), granted_by=person().id,
                      now=now())
        except InputProblem as wrong:
            problem = wrong
        else:
            return redirect(url_for("admin.authorisations_page", person_id=person_id), 303)
    held = authorisations.held_by(db(), person_id, include_revoked=True)
    names = people.names_by_id(db(), {a.granted_by for a in held if a.granted_by is not None})
    return render_template("admin/authorisations.html", who=who, held=held, names=names,
                           problem=problem, entered=request.form if problem else {},
                           signature_kinds=SIGNATURE_KINDS, procedure_kinds=PROCEDURE_KINDS,
                           today=now().date()), 422 if problem else 200


@bp.post("/people/<int:person_id>/authorisations/<int:authorisation_id>/revoke")
@requires("admin")
def revoke_authorisation(person_id: int, authorisation_id: int) -> Any:
    try:
        withdraw(db(), person_id=person_id, authorisation_id=authorisation_id, now=now())
    except NotFound:
        abort(404)
    return redirect(url_for("admin.authorisations_page", person_id=person_id), code=303)


@bp.route("/instruments", methods=["GET", "POST"])
@requires("admin")
def instruments_page() -> Any:
    """The register of calibrated instruments: each one as it is now, its history, and adding,
    calibrating, quarantining or withdrawing one (every change a new entry of the log)."""
    problem = None
    action = request.form.get("action", "add")
    if request.method == "POST":
        form = request.form
        try:
            if action == "calibrated":
                keeping.calibrated(db(), instrument_id=form.get("instrument_id", ""),
                                   calibration_due=form.get("calibration_due", ""),
                                   by=person().id, now=now())
            elif action == "take_out":
                keeping.take_out(db(), instrument_id=form.get("instrument_id", ""),
                                 status=form.get("status", ""), by=person().id, now=now())
            else:
                keeping.add(db(), instrument_id=form.get("instrument_id", ""),
                            kind=form.get("kind", ""), range_low=form.get("range_low", ""),
                            range_high=form.get("range_high", ""),
                            range_unit=form.get("range_unit", ""),
                            calibration_due=form.get("calibration_due", ""), by=person().id,
                            now=now())
        except InputProblem as wrong:
            problem = wrong
        else:
            return redirect(url_for("admin.instruments_page"), code=303)
    held = instrument_register.all_instruments(db())
    history = {i.instrument_id: instrument_register.history(db(), i.instrument_id)
               for i in held}
    names = people.names_by_id(db(), {e["changed_by"] for h in history.values() for e in h
                                      if e["changed_by"] is not None})
    return render_template("admin/instruments.html", held=held, history=history, names=names,
                           problem=problem, action=action,
                           entered=request.form if problem else {}, kinds=INSTRUMENT_KINDS,
                           today=now().date()), 422 if problem else 200
