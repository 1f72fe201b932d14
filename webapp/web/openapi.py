"""The OpenAPI 3 description of the JSON API, built from the same models that validate it."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel

from ..domain.event_data import EVENT_DATA
from ..domain.execution import CLIENT_EVENT_KINDS, EVENT_KINDS

EVENT_DATA_WORDS = (
    "What each kind carries in `data`. acknowledged (WARNING/CAUTION step): {}. "
    "step_done: {} or, for a check with items, {\"items\": [index, ...]} with every index. "
    "breaker_tagged (lockout apply step): {\"breaker\": id, \"tag\": number}. "
    "At an apply step with confirm_existing, the number of a tag found hanging on the breaker "
    "confirms it (stored with confirmed_existing and its owner). "
    "tag_handed_over (the tag's owner, any step): {\"tag\", \"to\": person id or username, "
    "\"pin\"}. tag_transfer_authorised (supervisor, any step): {\"tag\", \"to\", "
    "\"reason\", \"pin\"}. tag_taken_over (any step; step may be null; only after a "
    "hand-over or authorisation to the sender): {\"tag\": number, "
    "\"breaker_confirmed_open\": true}. tag_removal_authorised (supervisor, lockout release "
    "step with an absent-owner path): {\"tag\", \"reason\", \"pin\"}. tag_removed "
    "(lockout release step): {\"tag\": number}, by its owner or after a removal "
    "authorisation in the job; a typed \"absent_owner\" is refused. PINs are used, never "
    "stored. input_reconnected (any step): {}. lead_grounded (any step, once the "
    "procedure's grounding step is done): {}, the lead grounded again after a pause; a step "
    "handling the lead or exciter is refused (grounding_lapsed) more than 15 min after the "
    "last grounding, and work on a connection or a part (isolation_not_verified) before the "
    "isolation check passes. energised (ignition run "
    "step): {}. de_energised (any step): {} or {\"channel\": \"A\"|\"B\"}. "
    "reading_recorded (reading or torque step): {\"text\"} | {\"result\": \"pass\"|"
    "\"fail\"} | {\"value\", \"unit\"} plus, where the step asks, test_voltage / "
    "ambient_temperature {\"value\", \"unit\"}, humidity {\"value\"}, usage "
    "{engine_hours, starts, continuous_ignition_hours, continuous_ignition_estimated} (a "
    "wear step: the engine's totals as read from the aircraft's records, hours in engine "
    "hours); a step that names an instrument kind (every torque step: a torque wrench) "
    "adds \"instrument_id\", an ID of the station's register (422 when missing); refused "
    "(409) when unknown (instrument_unknown), of another kind (instrument_wrong_kind), "
    "quarantined or withdrawn (instrument_not_in_service), due for calibration before "
    "today (instrument_out_of_calibration; due today is still in) or when the value (a "
    "torque's wrench setting, a count's window) converted to its unit is outside its range "
    "(instrument_out_of_range); the reading keeps the instrument's kind, range and due date; "
    "torque adds \"fastener\" (one of the "
    "step's named fasteners, where it names them: each gets its own reading) and adapter "
    "{wrench_length, extension, angle (degrees to the wrench, 0 in line)}. finding (after "
    "an out-of-limits reading): {\"text\", \"disposition\": replaced|repaired|re-tested|"
    "deferred, \"reference\" and \"limit\" (hours, cycles or date; for "
    "deferred: the defect becomes an open item of the engine)}. part_recorded (part step): "
    "{\"part_number\", \"serial\", \"usage\": {engine_hours, starts, "
    "continuous_ignition_hours (optional)}: the engine's totals as read from the aircraft's "
    "records, in engine hours} plus, for a removal, \"status\": "
    "unserviceable|serviceable, \"reason\": scheduled|failed|robbed, \"tag\"; for an "
    "installation, \"release\" (release certificate reference), \"condition\": new|"
    "overhauled|serviceable used. A removed serial other than the one fitted is stored "
    "with verdict mismatch and needs a finding. item_closed (any step): {\"item\": the open "
    "item's id, \"how\"}. Events that change the engine are stored with their effects "
    "under data.engine. Usage totals (readings and part steps) become the engine's last "
    "entry; totals below an earlier entry (usage_backwards) or rising more than the time "
    "between the entries allows (usage_implausible_rise: engine hours by more than the clock "
    "hours, continuous-ignition hours by more than engine hours, starts by more than 10 + 4 "
    "per clock hour) are refused (409) with both sets of figures; continuous-ignition hours "
    "above engine hours are answered 422. sparks_counted (spark "
    "count step): {\"method\": \"taps\", \"taps\": [seconds, ...]} or {\"method\": \"timed\", "
    "\"count\", \"window_s\"}. signed (sign "
    "step, by a person the sign-off rules allow): {\"pin\"} (used, never stored); the "
    "station stores with it the signer's name and the authorisation used (\"authorisation\": "
    "its number, \"licence_kind\"). returned (supervisor, step null): "
    "{\"reason\", \"repeat_from\": a done work step's id or null}. amendment (supervisor, "
    "after certification, step: the done work step corrected): {\"field\": one of that "
    "step's recorded fields, \"new\": the corrected value, \"why\", \"pin\"}; the station "
    "takes the recorded value from the log and prints both.")

_REFUSAL = {
    "type": "object", "required": ["rule", "reason"],
    "properties": {"rule": {"type": "string", "description": "stable name of the rule"},
                   "reason": {"type": "string", "description": "words a mechanic understands"}},
}
_MALFORMED = {
    "type": "object", "required": ["rule", "reason", "problems"],
    "properties": {"rule": {"type": "string", "enum": ["malformed", "bad_input"]},
                   "reason": {"type": "string"},
                   "problems": {"type": "array", "items": {
                       "type": "object", "properties": {"field": {"type": "string"},
                                                        "problem": {"type": "string"}}}}},
}
_REUSED = {
    "type": "object", "required": ["rule", "reason"],
    "properties": {"rule": {"type": "string"}, "reason": {"type": "string"},
                   "event": {"$ref": "#/components/schemas/Event",
                             "description": "event_id_reused: the event stored under the id"}},
}
_EVENT = {
    "type": "object",
    "required": ["id", "job", "seq", "kind", "data", "person", "received_at", "prev_hash",
                 "hash"],
    "properties": {
        "id": {"type": "string", "format": "uuid"}, "job": {"type": "integer"},
        "seq": {"type": "integer"}, "step": {"type": ["string", "null"]},
        "kind": {"type": "string", "enum": list(EVENT_KINDS)},
        "data": {"type": "object"}, "person": {"type": "integer"},
        "device_time": {"type": ["string", "null"], "format": "date-time"},
        "device_sent": {"type": ["string", "null"], "format": "date-time",
                        "description": "the device's clock when it sent an entry that waited "
                                       "on it (null when sent as made)"},
        "received_at": {"type": "string", "format": "date-time"},
        "prev_hash": {"type": "string", "description": "SHA-256 of the job's previous event"},
        "hash": {"type": "string", "description": "SHA-256 of this event's chained fields"},
    },
}
_JOB = {
    "type": "object",
    "required": ["id", "status", "procedure", "revision", "steps", "done", "next_step"],
    "properties": {
        "id": {"type": "integer"}, "status": {"type": "string", "enum": ["open", "complete"]},
        "procedure": {"type": "string"}, "procedure_title": {"type": "string"},
        "revision": {"type": "string", "description": "SHA-256 of the pinned revision"},
        "revision_number": {"type": "integer"}, "engine": {"type": "integer"},
        "engine_serial": {"type": "string"}, "aircraft": {"type": "string"},
        "position": {"type": "integer"}, "channel": {"type": ["string", "null"]},
        "steps": {"type": "array", "items": {"type": "object", "properties": {
            "id": {"type": "string"}, "number": {"type": "integer"},
            "kind": {"type": "string"}, "text": {"type": "string"},
            "status": {"type": "string", "enum": ["done", "next", "waiting"]},
            "recordable": {"type": "boolean"},
            "items": {"type": "array", "items": {"type": "string"},
                      "description": "check steps: what to confirm (data.items: indexes)"},
            "action": {"type": "string", "enum": ["apply", "release"]},
            "breakers": {"type": "array", "items": {"type": "string"}},
            "value": {"type": "string", "enum": ["number", "text", "pass_fail"]},
            "unit": {"type": ["string", "null"]}, "limits": {"type": ["object", "null"]},
            "conditions": {"type": "array", "items": {"type": "string"}},
            "wear": {"type": "boolean"}, "adapter": {"type": "boolean"}}}},
        "done": {"type": "array", "items": {"type": "string"}},
        "next_step": {"type": ["string", "null"]},
        "readings": {"type": "array", "items": {"type": "object"},
                     "description": "every reading attempt, as entered and converted, with "
                                    "its verdict and any finding"},
        "awaiting_finding": {"type": "array", "items": {"type": "string"},
                             "description": "steps whose last reading is out of limits"},
        "ignition": {"type": "object", "description": "duty-cycle clock per channel",
                     "additionalProperties": {"type": "object", "properties": {
                         "on": {"type": "boolean"}, "on_for_s": {"type": "number"},
                         "on_limit_s": {"type": ["number", "null"]},
                         "on_remaining_s": {"type": ["number", "null"]},
                         "next_on_allowed_in_s": {"type": "number"},
                         "runs": {"type": "integer"}, "overrun_s": {"type": "number"}}}},
        "progress": {"type": "string", "description": "in work, returned, waiting for "
                     "inspection, waiting for certification, released, closed, not released"},
        "engine_state": {"type": "object", "description": "the engine as the station knows "
                         "it now: why each channel is not whole (empty when it is), the "
                         "fitted exciters' duty-cycle clocks, functional checks due, open "
                         "items", "properties": {
                             "not_whole": {"type": "object", "additionalProperties": {
                                 "type": "array", "items": {"type": "string"}}},
                             "exciter_clocks": {"type": "object"},
                             "checks_due": {"type": "array", "items": {"type": "string"}},
                             "open_items": {"type": "array", "items": {"type": "object"}}}},
        "url": {"type": "string"},
    },
}
_FLEET = {
    "type": "object", "properties": {"aircraft": {"type": "array", "items": {
        "type": "object", "properties": {
            "id": {"type": "integer"}, "registration": {"type": "string"},
            "model": {"type": "string"},
            "engines": {"type": "array", "items": {"type": "object", "properties": {
                "id": {"type": "integer"}, "serial": {"type": "string"},
                "model": {"type": "string"}, "position": {"type": "integer"},
                "components": {"type": "array", "items": {"type": "object", "properties": {
                    "kind": {"type": "string", "enum": ["exciter", "lead", "plug"]},
                    "part_number": {"type": "string"}, "serial": {"type": "string"},
                    "type": {"type": "string"}, "channel": {"type": ["string", "null"]}}}}}}}}}}},
}


def _json(schema: dict[str, Any] | str) -> dict[str, Any]:
    ref = {"$ref": f"#/components/schemas/{schema}"} if isinstance(schema, str) else schema
    return {"application/json": {"schema": ref}}


def _answer(description: str, schema: dict[str, Any] | str) -> dict[str, Any]:
    return {"description": description, "content": _json(schema)}


def _errors(*, write: bool) -> dict[str, Any]:
    """What any operation may answer besides its own: no session (401, also ahead of the CSRF
    check), a role that may not (403); a write also 400 (no or stale CSRF token, a body that is
    not JSON: NaN, Infinity, lone surrogates, control characters) and 413 (body over 256 KB)."""
    found = {"401": _answer("not logged in", "Refusal"),
             "403": _answer("role not allowed", "Refusal"),
             "400": _answer("a query parameter or the body cannot be used (control "
                            "characters, not JSON); for a write also a missing CSRF token",
                            "Refusal")}
    if write:
        found["413"] = _answer("body larger than the station takes; nothing stored", "Refusal")
    return found


def _event_data_schemas() -> tuple[dict[str, Any], dict[str, Any]]:
    """Each kind's data schema (from domain/event_data.py's models) and the models they use."""
    schemas: dict[str, Any] = {}
    shared: dict[str, Any] = {}
    for kind, model in EVENT_DATA.items():
        schema = model.model_json_schema(ref_template="#/components/schemas/{model}")
        shared.update(schema.pop("$defs", {}))
        schemas[f"EventData_{kind}"] = schema
    return schemas, shared


def _event_in(event_in: type[BaseModel]) -> dict[str, Any]:
    """EventIn as one variant per kind: the kind names the shape of its data."""
    base = event_in.model_json_schema(ref_template="#/components/schemas/{model}")
    variants = []
    for kind in CLIENT_EVENT_KINDS:
        properties = {**base["properties"], "kind": {"type": "string", "const": kind},
                      "data": {"$ref": f"#/components/schemas/EventData_{kind}"}}
        variants.append({"type": "object", "title": f"EventIn_{kind}",
                         "required": base.get("required", []), "additionalProperties": False,
                         "properties": properties})
    return {"description": EVENT_DATA_WORDS, "oneOf": variants,
            "discriminator": {"propertyName": "kind"}}


def openapi_document(job_in: type[BaseModel], event_in: type[BaseModel],
                     cookie_name: str = "session") -> dict[str, Any]:
    """The document; `cookie_name` is the session cookie's (`__Host-session` over HTTPS)."""
    data_schemas, shared = _event_data_schemas()
    job_id = [{"name": "job_id", "in": "path", "required": True,
               "schema": {"type": "integer", "minimum": 0, "maximum": 2**63 - 1}}]
    write: dict[str, Any] = {"security": [{"session": [], "csrf": []}]}
    return {
        "openapi": "3.1.0",
        "info": {"title": "Sparkward station API", "version": "1",
                 "description": "Session cookie from /login; every write sends the page's "
                                "csrf-token as the X-CSRFToken header. Bodies up to 256 KB."},
        "components": {
            "securitySchemes": {
                "session": {"type": "apiKey", "in": "cookie", "name": cookie_name},
                "csrf": {"type": "apiKey", "in": "header", "name": "X-CSRFToken"}},
            "schemas": {"JobIn": job_in.model_json_schema(), "EventIn": _event_in(event_in),
                        "Event": _EVENT, "Job": _JOB, "Fleet": _FLEET, "Refusal": _REFUSAL,
                        "Malformed": _MALFORMED, "Reused": _REUSED, **data_schemas,
                        **shared}},
        "paths": {
            "/healthz": {"get": {"summary": "Station health", "responses": {
                "200": _answer("ok", {"type": "object"}),
                "400": _answer("a query parameter cannot be used", "Refusal")}}},
            "/api/fleet": {"get": {"summary": "Aircraft, engines and installed components",
                                   "security": [{"session": []}],
                                   "responses": {"200": _answer("the fleet", "Fleet"),
                                                 **_errors(write=False)}}},
            "/api/jobs": {"post": {
                "summary": "Open a job with the approved revision of a procedure", **write,
                "requestBody": {"required": True, "content": _json("JobIn")},
                "responses": {"201": _answer("the job opened", "Job"),
                              "404": _answer("no such engine or procedure", "Refusal"),
                              "409": _answer("refused by a rule (effectivity, channel)",
                                             "Refusal"),
                              "422": _answer("malformed; nothing stored", "Malformed"),
                              **_errors(write=True)}}},
            "/api/jobs/{job_id}": {"get": {
                "summary": "A job's state, derived from its events", "parameters": job_id,
                "security": [{"session": []}],
                "responses": {"200": _answer("the job", "Job"),
                              "404": _answer("no such job", "Refusal"),
                              **_errors(write=False)}}},
            "/api/jobs/{job_id}/events": {"post": {
                "summary": "Record an event (idempotent on its id)", "parameters": job_id,
                **write, "requestBody": {"required": True, "content": _json("EventIn")},
                "responses": {"201": _answer("stored", "Event"),
                              "200": _answer("already stored: the same entry sent again "
                                             "(same job, kind, step, device time and data) "
                                             "gets the first answer again", "Event"),
                              "404": _answer("no such job", "Refusal"),
                              "409": _answer("refused by a rule; or the id was used for a "
                                             "different entry (event_id_reused, with the "
                                             "stored event)", "Reused"),
                              "422": _answer("malformed, or data not of its kind's shape "
                                             "(unknown field, wrong type, too long); "
                                             "nothing stored", "Malformed"),
                              **_errors(write=True)}}},
        },
    }
