"""Sparkward's station: create_app(config) wires configuration, storage and the rooms."""

from __future__ import annotations

import os
import secrets
import tomllib
import warnings
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from flask import Flask

from .clock import system_clock
from .resources import shipped_dir

# pyHanko imports cryptography's DSA key class, which cryptography 51 marks deprecated when
# it is looked up; the station never makes or accepts a DSA key (its keys are EC and RSA).
# Only that message is silenced, so a start-up does not print a warning that asks nothing.
warnings.filterwarnings("ignore", message="DSA is deprecated", category=UserWarning)

DEFAULTS: dict[str, Any] = {
    "DB_FILENAME": "sparkward.db",
    # Log-in throttle (domain/login_throttle.py): failures for a name from one address, and
    # from one address for any name, before each further try waits 1 s, 2 s, 4 s, ... up to
    # the longest delay.
    "LOGIN_MAX_FAILURES": 5,
    "LOGIN_ADDRESS_MAX_FAILURES": 20,
    "LOGIN_MAX_DELAY_MINUTES": 15,
    # A session ends after this long unused, and this long after log-in whatever happens
    # (domain/session_limits.py says why these numbers).
    "SESSION_IDLE_MINUTES": 8 * 60,
    "SESSION_ABSOLUTE_HOURS": 12,
    "SESSION_COOKIE_HTTPONLY": True,
    "SESSION_COOKIE_SAMESITE": "Lax",
    "SESSION_REFRESH_EACH_REQUEST": False,  # re-signing the cookie on every tap costs time
    "WTF_CSRF_TIME_LIMIT": None,  # the token lives as long as the session
    "STATION_NAME": "Sparkward station",
    "MAX_BODY_BYTES": 256 * 1024,  # JSON and form bodies (input_guard answers 413 beyond)
    "MAX_UPLOAD_BYTES": 20 * 1024 * 1024,  # a record PDF sent to "Check a record"
}


def create_app(config: Mapping[str, Any] | None = None) -> Flask:
    """Build the station. Configuration, later wins: defaults, the instance file
    (instance/sparkward.toml), the SPARKWARD_DB environment variable, `config`."""
    instance = Path(os.environ.get("SPARKWARD_INSTANCE", Path.cwd() / "instance")).resolve()
    app = Flask(__name__, instance_path=str(instance), static_folder=str(shipped_dir("static")),
                static_url_path="/static")
    app.config.from_mapping(DEFAULTS)
    app.config["DB_PATH"] = str(instance / app.config["DB_FILENAME"])
    app.config["CLOCK"] = system_clock
    instance_file = instance / "sparkward.toml"
    if instance_file.is_file():
        app.config.from_file(str(instance_file), load=tomllib.load, text=False)
    if os.environ.get("SPARKWARD_DB"):
        app.config["DB_PATH"] = os.environ["SPARKWARD_DB"]
    if config:
        app.config.from_mapping(config)
    if not app.config.get("SECRET_KEY"):
        app.config["SECRET_KEY"] = _station_secret(Path(app.config["DB_PATH"]))

    register_extensions(app)
    register_blueprints(app)
    register_errorhandlers(app)
    register_commands(app)
    return app


def _station_secret(db_path: Path) -> str:
    """A session key kept beside the database, so log-ins survive a restart."""
    key_file = db_path.with_name(db_path.name + ".secret")
    if key_file.is_file():
        return key_file.read_text().strip()
    key_file.parent.mkdir(parents=True, exist_ok=True)
    key = secrets.token_hex(32)
    key_file.write_text(key)
    key_file.chmod(0o600)
    return key


def register_extensions(app: Flask) -> None:
    from .web import assets, compression, input_guard
    from .web.common import csrf, init_database
    from .web.headers import register as register_security_headers

    input_guard.register(app)  # first: sizes and text checked before anything reads the body
    init_database(app)  # who is logged in, before the CSRF check: a stranger hears 401
    csrf.init_app(app)
    register_security_headers(app)
    assets.register(app)  # static URLs carry their content hash
    compression.register(app)  # brotli or gzip for text answers


def register_blueprints(app: Flask) -> None:
    from .web import (
        account,
        admin,
        api,
        auth,
        carry,
        fleet,
        mechanic,
        procedures,
        pwa,
        station,
        supervisor,
    )

    for room in (auth, account, mechanic, carry, fleet, api, procedures, supervisor, admin,
                 pwa, station):
        app.register_blueprint(room.bp)


def register_errorhandlers(app: Flask) -> None:
    from .web.errors import register

    register(app)


def register_commands(app: Flask) -> None:
    from .cli import register

    register(app)
