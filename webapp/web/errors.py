"""One error handler for pages and one for JSON, for refusals and HTTP errors alike."""

from __future__ import annotations

from typing import Any

from flask import Flask, Response, current_app, g, jsonify, render_template, request
from flask_wtf.csrf import CSRFError
from werkzeug.exceptions import HTTPException

from ..domain.errors import RuleRefusal
from ..station.recording import NotFound
from .common import wants_json
from .input_guard import InputRefused, log_refusal

_TITLES = {
    400: "That request could not be used",
    401: "Please log in",
    403: "Your role does not allow this",
    404: "Not found",
    405: "Not allowed here",
    413: "Too much sent at once",
    409: "Refused by a rule",
    422: "Check what was entered",
    429: "Too many attempts",
}


def _answer(status: int, rule: str, reason: str, **details: Any) -> Any:
    if wants_json():
        return jsonify({"rule": rule, "reason": reason, **details}), status
    title = _TITLES.get(status, "Something went wrong")
    return render_template("error.html", status=status, title=title, reason=reason), status


def register(app: Flask) -> None:
    @app.errorhandler(CSRFError)
    def csrf_failed(err: CSRFError) -> Any:
        view = current_app.view_functions.get(request.endpoint or "")
        if g.get("person") is None and "anyone" not in getattr(view, "allowed_roles", ("anyone",)):
            # The real cause: nobody is logged in where only people may write.
            return _answer(401, "http_401", "Log in first; nothing was stored.")
        return _answer(400, "csrf", "The form's security token was missing or out of date. "
                       "Reload the page and try again. (" + str(err.description) + ")")

    @app.errorhandler(RuleRefusal)
    def refused(err: RuleRefusal) -> Any:
        return _answer(409, err.rule, err.reason, **err.details)

    @app.errorhandler(NotFound)
    def not_found(err: NotFound) -> Any:
        return _answer(404, "not_found", str(err).capitalize() + ".")

    @app.errorhandler(HTTPException)
    def http_error(err: HTTPException) -> Any:
        status = err.code or 500
        return _answer(status, f"http_{status}", str(err.description))

    @app.errorhandler(InputRefused)
    def input_refused(err: InputRefused) -> Any:
        return _answer(400, "bad_input", err.message + " Nothing was stored.",
                       problems=[{"field": err.field, "problem": err.message}])

    @app.after_request
    def log_refused(response: Response) -> Response:
        if response.status_code in (409, 413, 422):
            rule = (response.get_json(silent=True) or {}).get("rule") if response.is_json else None
            log_refusal(response.status_code, str(rule or "page"))
        return response

