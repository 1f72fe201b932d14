"""What every room shares: the request's database, who is logged in, roles, page-or-fragment."""

from __future__ import annotations

import threading
import uuid
from collections.abc import Callable
from datetime import UTC, datetime, timedelta
from functools import wraps
from typing import Any, TypeVar

from flask import Flask, abort, current_app, g, redirect, render_template, request, session, url_for
from flask_wtf.csrf import CSRFProtect

from .. import store
from ..domain.login_throttle import ThrottlePolicy
from ..domain.session_limits import SessionLimits
from ..station import accounts
from ..store.people import Person
from .assets import HASHED_ENDPOINTS

csrf = CSRFProtect()

# What a supervisor who is not also a mechanic may send about a job: never the work itself.
# A supervisor's authorisation for an absent tag owner is theirs to give, not work.
SUPERVISOR_EVENTS = ("signed", "returned", "amendment", "tag_transfer_authorised",
                     "tag_removal_authorised")

F = TypeVar("F", bound=Callable[..., Any])

SESSION_TOKEN = "session_token"  # the key in Flask's signed cookie that carries the token


def session_limits(app: Flask) -> SessionLimits:
    return SessionLimits(idle=timedelta(minutes=app.config["SESSION_IDLE_MINUTES"]),
                         absolute=timedelta(hours=app.config["SESSION_ABSOLUTE_HOURS"]))


def throttle_policy(app: Flask) -> ThrottlePolicy:
    return ThrottlePolicy(free_per_pair=app.config["LOGIN_MAX_FAILURES"],
                          free_per_address=app.config["LOGIN_ADDRESS_MAX_FAILURES"],
                          longest_delay=timedelta(minutes=app.config["LOGIN_MAX_DELAY_MINUTES"]))


def init_database(app: Flask) -> None:
    """Apply pending migrations at start; keep one connection per server thread.

    A connection lives as long as its thread: opening one costs about a
    millisecond, and closing the last one checkpoints the write-ahead log.
    """
    store.create(app.config["DB_PATH"]).close()
    app.extensions["sparkward.connections"] = threading.local()

    @app.teardown_appcontext
    def end_request(_exc: BaseException | None) -> None:
        db = g.pop("db", None)
        if db is not None and db.conn.in_transaction:
            db.conn.rollback()  # never carry a half-done transaction into the next request

    # The cookie lives no longer than the station's absolute limit for a session.
    app.config["PERMANENT_SESSION_LIFETIME"] = session_limits(app).absolute

    @app.before_request
    def load_person() -> None:
        """Who is logged in: the session the cookie's token names, if it is still open."""
        g.person = None
        if request.endpoint in HASHED_ENDPOINTS:
            # A file of static/ is the same for everyone: reading the session would add
            # "Vary: Cookie", and a browser would fetch it again after each log-in.
            return
        token = session.get(SESSION_TOKEN)
        if token is None:
            return
        g.person = accounts.person_for_session(db(), str(token), now=now(),
                                               limits=session_limits(current_app))
        if g.person is None:
            # The token is dead: drop it but keep the form token, so a tablet's queued
            # write is answered "log in again" rather than "security token out of date".
            session.pop(SESSION_TOKEN, None)

    @app.template_filter("when")
    def when(iso: str | None) -> str:
        """A stored ISO time as the station shows it: date, hours and minutes, UTC."""
        if not iso:
            return "—"
        if iso.endswith("+00:00"):  # the station stores UTC: no parsing needed
            return f"{iso[:10]} {iso[11:16]} UTC"
        moment = datetime.fromisoformat(iso).astimezone(UTC)
        return moment.strftime("%Y-%m-%d %H:%M UTC")

    from ..domain.gates import mmss
    from ..domain.isolation import GROUNDING_VALID_S
    from .progress import progress_list
    from .reading_views import register as register_reading_views

    register_reading_views(app)

    app.jinja_env.filters["mmss"] = mmss
    app.jinja_env.globals["grounding_minutes"] = GROUNDING_VALID_S // 60
    app.jinja_env.globals["new_event_id"] = lambda: str(uuid.uuid4())

    app.jinja_env.globals["progress_list"] = progress_list
    app.jinja_env.globals["when"] = when

    @app.context_processor
    def inject_person() -> dict[str, Any]:
        return {"person": g.get("person"), "station_name": app.config["STATION_NAME"]}


def db() -> store.Database:
    """This thread's connection to the station database."""
    if "db" not in g:
        local = current_app.extensions["sparkward.connections"]
        if getattr(local, "db", None) is None:
            local.db = store.connect(current_app.config["DB_PATH"])
        g.db = local.db
    return g.db


def now() -> datetime:
    return current_app.config["CLOCK"]()


def authority() -> Any:
    """The station's certificate authority (made on first use, kept in the instance folder)."""
    from ..station.authority import station_authority

    return station_authority(current_app.config["DB_PATH"], current_app.config["STATION_NAME"],
                             now())


def person() -> Person:
    """The logged-in person (routes reach here only through `requires`)."""
    found = g.get("person")
    if found is None:
        abort(401)
    return found


def requires(*roles: str) -> Callable[[F], F]:
    """Allow a route to people holding any of `roles`; others get 403, strangers the log-in.

    The roles are kept on the view so a test can check that every route names them.
    """
    def decorate(view: F) -> F:
        @wraps(view)
        def guarded(*args: Any, **kwargs: Any) -> Any:
            who = g.get("person")
            if who is None:
                if wants_json():
                    abort(401)
                return redirect(url_for("auth.login", next=request.full_path))
            if not any(who.has(role) for role in roles):
                abort(403)
            return view(*args, **kwargs)

        guarded.allowed_roles = roles  # type: ignore[attr-defined]
        return guarded  # type: ignore[return-value]
    return decorate


def public(view: F) -> F:
    """Mark a route as open to anyone (log-in page, health check, API description)."""
    view.allowed_roles = ("anyone",)  # type: ignore[attr-defined]
    return view


def wants_json() -> bool:
    return request.path.startswith("/api/") or request.path == "/healthz"


def is_fragment_request() -> bool:
    return request.headers.get("HX-Request") == "true" and not request.headers.get(
        "HX-History-Restore-Request")


def page_or_fragment(page: str, fragment: str, status: int = 200, **context: Any) -> Any:
    """Render the whole page, or only its fragment when htmx asks for it."""
    template = fragment if is_fragment_request() else page
    response = current_app.make_response((render_template(template, **context), status))
    response.vary.add("HX-Request")
    return response
