"""A person's own account: the sessions open under their name, and ending them."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, current_app, redirect, render_template, request, session, url_for

from ..station.accounts import LoginRefused, end_own_sessions, token_hash
from ..store import people, sessions
from .common import SESSION_TOKEN, db, now, person, requires, session_limits, throttle_policy

bp = Blueprint("account", __name__)


def _page(error: str | None = None, ended: int | None = None, status: int = 200) -> Any:
    limits = session_limits(current_app)
    mine = sessions.sessions_of(db(), person().id, created_since=now() - limits.absolute,
                                seen_since=now() - limits.idle)
    here = token_hash(str(session.get(SESSION_TOKEN, "")))
    return render_template("auth/sessions.html", sessions=mine, here=here, error=error,
                           ended=ended), status


@bp.get("/account/sessions")
@requires(*people.ROLES)
def sessions_page() -> Any:
    """Where this person is logged in (tablets, desks), with a way to end any of them."""
    return _page(ended=request.args.get("ended", type=int))


@bp.post("/account/sessions/end")
@requires(*people.ROLES)
def end_sessions() -> Any:
    """End one session of one's own, or all the others, after giving the password again."""
    limits = session_limits(current_app)
    mine = sessions.sessions_of(db(), person().id, created_since=now() - limits.absolute,
                                seen_since=now() - limits.idle)
    here = token_hash(str(session.get(SESSION_TOKEN, "")))
    if request.form.get("session") == "others":
        numbers = [s["number"] for s in mine if s["token_hash"] != here]
    else:
        wanted = request.form.get("session", "")
        numbers = [s["number"] for s in mine if str(s["number"]) == wanted]
        if not numbers:
            return _page("That session is not one of yours that is still open.", status=404)
    try:
        ended = end_own_sessions(db(), person(), request.form.get("password", ""),
                                 numbers=numbers, address=request.remote_addr or "unknown",
                                 now=now(), policy=throttle_policy(current_app))
    except LoginRefused as refused:
        response = current_app.make_response(_page(str(refused), status=(
            429 if refused.retry_after else 403)))
        if refused.retry_after:
            response.headers["Retry-After"] = str(refused.retry_after)
        return response
    if any(s["token_hash"] == here and s["number"] in numbers for s in mine):
        session.clear()  # this browser's own session ended: to the log-in page
        return redirect(url_for("auth.login"), code=303)
    return redirect(url_for("account.sessions_page", ended=ended), code=303)
