"""Log-in and log-out, and the home page that sends each role to its room."""

from __future__ import annotations

import unicodedata
from typing import Any
from urllib.parse import unquote

from flask import (
    Blueprint,
    current_app,
    g,
    redirect,
    render_template,
    request,
    session,
    url_for,
)

from ..station.accounts import LoginRefused, log_in, log_out
from .common import SESSION_TOKEN, db, now, public, requires, throttle_policy

bp = Blueprint("auth", __name__)

HOME_BY_ROLE = (("mechanic", "mechanic.fleet"), ("supervisor", "supervisor.review_queue"),
                ("trainer", "procedures.index"), ("admin", "admin.people_page"))

LONGEST_NEXT = 2000  # a path and query of this station's own; longer is not one of ours
# Unicode categories: controls, formats (bidi marks, zero-width), surrogates, private use,
# unassigned, line and paragraph separators.
_NOT_IN_A_PATH = {"Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"}


def station_path(target: str | None) -> str | None:
    """`target` if it is a path on this station (where to go after log-in), else None.

    Only a path starting with one "/" is kept: no scheme, no host ("//host", "/\\host",
    which browsers read as "//host"), no backslash anywhere, no control or invisible
    formatting character (browsers drop a tab or a newline, so "/", tab, "/host" would
    become "//host"), and the same once more after percent-decoding (so "/%2F%2Fhost" and
    "/%09/host" are refused as well), at most LONGEST_NEXT characters.
    """
    if not target or len(target) > LONGEST_NEXT:
        return None
    for form in (target, unquote(target)):
        if not form.startswith("/") or form.startswith(("//", "/\\")) or "\\" in form:
            return None
        if any(unicodedata.category(c) in _NOT_IN_A_PATH for c in form):
            return None
    return target


@bp.get("/")
@requires("mechanic", "supervisor", "trainer", "admin")
def home() -> Any:
    for role, endpoint in HOME_BY_ROLE:
        if g.person.has(role):
            return redirect(url_for(endpoint))
    return redirect(url_for("auth.login"))


@bp.route("/login", methods=["GET", "POST"])
@public
def login() -> Any:
    error = None
    retry_after = None
    if request.method == "POST":
        try:
            made = log_in(db(), request.form.get("username", ""),
                          request.form.get("password", ""),
                          address=request.remote_addr or "unknown",
                          user_agent=request.user_agent.string, now=now(),
                          policy=throttle_policy(current_app),
                          replacing=session.get(SESSION_TOKEN))
        except LoginRefused as refused:
            error, retry_after = str(refused), refused.retry_after
        else:
            # A new session and a new form token (ASVS 4.0.3 V3.2.1): nothing carried over.
            session.clear()
            session[SESSION_TOKEN] = made.token
            session.permanent = True
            target = station_path(request.args.get("next")) or url_for("auth.home")
            return redirect(target, code=303)
    status = 429 if retry_after else 401 if error else 200
    response = current_app.make_response((render_template(
        "auth/login.html", error=error, username=request.form.get("username", "")), status))
    if retry_after:
        response.headers["Retry-After"] = str(retry_after)  # RFC 6585 section 4
    return response


@bp.post("/logout")
@public
def logout() -> Any:
    token = session.get(SESSION_TOKEN)
    if token is not None:
        log_out(db(), str(token), now())
    session.clear()
    return redirect(url_for("auth.login"), code=303)
