"""Fuzzing the station from its own description: every JSON operation in /api/openapi.json
with requests generated from its schemas (valid and not), every form route and page with
generated fields and query text, as a logged-in person and as a stranger.

Asserted for every answer: no 5xx; its status is one the operation declares; a JSON answer
validates against the declared schema (a small JSON Schema checker below: the keywords the
document uses). Afterwards no stored event holds a field the fuzzer made up.
Example counts are bounded (Hypothesis `max_examples`), so the file runs in about half a minute.
"""

from __future__ import annotations

import json
import re
import uuid
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

JUNK = "zz_junk"  # every field name the fuzzer invents starts so
FUZZ = settings(max_examples=60, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.function_scoped_fixture,
                                       HealthCheck.too_slow, HealthCheck.data_too_large])
FORM_FUZZ = settings(FUZZ, max_examples=15)


# --- a JSON Schema subset: generate and check ------------------------------------------------

def _resolve(schema: dict, document: dict) -> dict:
    while "$ref" in schema:
        name = schema["$ref"].rsplit("/", 1)[-1]
        schema = {**document["components"]["schemas"][name],
                  **{k: v for k, v in schema.items() if k != "$ref"}}
    return schema


# Text a person could type (no control characters: refused as input, 400) and text with them.
_TEXT = st.text(st.characters(codec="utf-8", exclude_categories=("Cs", "Cc")), max_size=30)
_ANY_TEXT = st.text(st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=30)
_NASTY_TEXT = st.sampled_from(["", " ", "²", "1e999", "nan", "-0", "A" * 300, "\u202e", "%00",
                               "../../etc", "<script>", "T-1", "CB-IGN-A", "Nm", "in·lbf"])
_JSON_JUNK = st.recursive(
    st.none() | st.booleans() | st.integers(min_value=-(2**70), max_value=2**70)
    | st.floats(allow_nan=False, allow_infinity=False) | _ANY_TEXT | _NASTY_TEXT,
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(_TEXT, inner, max_size=3),
    max_leaves=8)


def values(schema: dict, document: dict, depth: int = 0) -> st.SearchStrategy:
    """Values valid for `schema` (for the keywords this document uses)."""
    schema = _resolve(schema, document)
    if "const" in schema:
        return st.just(schema["const"])
    if "enum" in schema:
        return st.sampled_from(schema["enum"])
    for key in ("oneOf", "anyOf"):
        if key in schema:
            return st.one_of([values(s, document, depth + 1) for s in schema[key]])
    kind = schema.get("type")
    if isinstance(kind, list):
        return st.one_of([values({**schema, "type": k}, document, depth) for k in kind])
    if kind == "string":
        if schema.get("format") == "uuid":
            return st.uuids().map(str)
        if schema.get("format") == "date-time":
            return st.datetimes(timezones=st.just(__import__("datetime").UTC)).map(
                lambda d: d.isoformat())
        return (_TEXT | _NASTY_TEXT).map(lambda t: t[:schema.get("maxLength", 10_000)])
    if kind == "integer":
        return st.integers(schema.get("minimum", -(2**63)), schema.get("maximum", 2**63 - 1))
    if kind == "number":
        return st.floats(schema.get("minimum"), schema.get("maximum"), allow_nan=False,
                         allow_infinity=False)
    if kind == "boolean":
        return st.booleans()
    if kind == "null":
        return st.none()
    if kind == "array":
        item = values(schema.get("items", {}), document, depth + 1) if depth < 4 else st.none()
        return st.lists(item, max_size=min(schema.get("maxItems", 4), 4))
    if kind == "object" or "properties" in schema:
        properties = schema.get("properties", {})
        required = set(schema.get("required", []))
        return st.fixed_dictionaries(
            {k: values(v, document, depth + 1) for k, v in properties.items() if k in required},
            optional={k: values(v, document, depth + 1) for k, v in properties.items()
                      if k not in required} if depth < 4 else {})
    return _JSON_JUNK


def _wrong(value: Any) -> st.SearchStrategy:
    """A valid value spoiled: a junk field added, a field's type changed, huge numbers."""
    if isinstance(value, dict) and value:
        return st.one_of(
            _JSON_JUNK.map(lambda j: {**value, JUNK + "_field": j}),
            st.sampled_from(sorted(value)).flatmap(
                lambda k: _JSON_JUNK.map(lambda j: {**value, k: j})),
            st.sampled_from(sorted(value)).flatmap(
                lambda k: _wrong(value[k]).map(lambda w: {**value, k: w})))
    return _JSON_JUNK


def valid_or_not(schema: dict, document: dict) -> st.SearchStrategy:
    valid = values(schema, document)
    return st.one_of(valid, valid.flatmap(_wrong), _JSON_JUNK)


_TYPES = {"string": str, "integer": int, "number": (int, float), "boolean": bool,
          "null": type(None), "array": list, "object": dict}


def problems(value: Any, schema: dict, document: dict, at: str = "") -> list[str]:
    """Where `value` breaks `schema` (empty when it validates)."""
    schema = _resolve(schema, document)
    for key in ("oneOf", "anyOf"):
        if key in schema:
            tried = [problems(value, s, document, at) for s in schema[key]]
            return [] if any(not t for t in tried) else [f"{at}: matches no {key} branch"]
    found: list[str] = []
    if "type" in schema:
        kinds = schema["type"] if isinstance(schema["type"], list) else [schema["type"]]
        fits = any(isinstance(value, _TYPES[k]) and not (k in ("integer", "number")
                                                          and isinstance(value, bool))
                   for k in kinds)
        if not fits:
            return [f"{at}: {value!r:.60} is not {kinds}"]
    if "enum" in schema and value not in schema["enum"]:
        found.append(f"{at}: {value!r:.60} not in {schema['enum']}")
    if "const" in schema and value != schema["const"]:
        found.append(f"{at}: {value!r:.60} is not {schema['const']!r}")
    if isinstance(value, dict):
        for name in schema.get("required", []):
            if name not in value:
                found.append(f"{at}.{name}: required, missing")
        for name, item in value.items():
            if name in schema.get("properties", {}):
                found += problems(item, schema["properties"][name], document, f"{at}.{name}")
            elif isinstance(schema.get("additionalProperties"), dict):
                found += problems(item, schema["additionalProperties"], document,
                                  f"{at}.{name}")
            elif schema.get("additionalProperties") is False:
                found.append(f"{at}.{name}: not declared")
    if isinstance(value, list) and "items" in schema:
        for index, item in enumerate(value):
            found += problems(item, schema["items"], document, f"{at}.{index}")
    return found


def check_answer(answer, operation: dict, document: dict, what: str) -> None:
    status = answer.status_code
    assert status < 500, (what, status, answer.get_data(as_text=True)[:500])
    declared = operation["responses"]
    assert str(status) in declared, (what, status, answer.get_data(as_text=True)[:300])
    content = declared[str(status)].get("content", {}).get("application/json")
    if content is not None:
        assert answer.is_json, (what, status)
        body = json.loads(answer.get_data(as_text=True), parse_constant=_not_json)
        found = problems(body, content["schema"], document)
        assert not found, (what, status, found[:5])


def _not_json(name: str) -> Any:
    raise AssertionError(f"{name} in an answer: not JSON (RFC 8259 section 6)")


def _no_junk_stored(db) -> None:
    rows = db.execute("select data from events where data like ?", [f"%{JUNK}%"]).fetchall()
    assert rows == []


# --- the JSON API, from its own description -------------------------------------------------

@pytest.fixture
def document(client) -> dict:
    return client.get("/api/openapi.json").get_json()


def _operations(document: dict) -> list[tuple[str, str, dict]]:
    return [(path, method, op) for path, item in document["paths"].items()
            for method, op in item.items()]


def _send(who, path: str, method: str, body: Any, job_id: int, query: str = ""):
    url = path.replace("{job_id}", str(job_id)) + query
    if method == "get":
        return who.get(url)
    text = json.dumps(body)
    headers = {"X-CSRFToken": who.token} if hasattr(who, "token") else {}
    client = getattr(who, "client", who)
    return client.post(url, data=text, content_type="application/json", headers=headers)


@pytest.mark.parametrize("as_whom", ["mech1", "super", "stranger"])
def test_every_operation_answers_as_it_declares(as_whom, login, client, document, db):
    who = client if as_whom == "stranger" else login(as_whom)
    opened = login("mech1").post_json("/api/jobs", {"procedure": "exciter-removal",
                                                    "engine": 1, "channel": "A"})
    real_job = opened.get_json()["id"]
    operations = _operations(document)
    # the job opened, SQLite's integer bounds (sqlite.org/datatype3.html) and beyond
    job_ids = st.one_of(st.just(real_job), st.sampled_from([0, 2**63 - 1, 2**63, 2**64 + 1]),
                        st.integers(-5, 2**70))
    queries = st.one_of(st.just(""), _TEXT.map(lambda t: "?q=" + __import__(
        "urllib.parse").parse.quote(t)), st.just("?next=%0d%0a"))

    @FUZZ
    @given(st.sampled_from(operations).flatmap(lambda o: st.tuples(
        st.just(o), valid_or_not(_body_schema(o[2]), document))), job_ids, queries)
    def one_request(chosen, job_id, query):
        (path, method, operation), body = chosen
        answer = _send(who, path, method, body, job_id, query)
        check_answer(answer, operation, document, f"{method} {path} {body!r:.200}")

    one_request()
    _no_junk_stored(db)


def _body_schema(operation: dict) -> dict:
    content = operation.get("requestBody", {}).get("content", {}).get("application/json")
    return content["schema"] if content else {"type": "null"}


def test_a_stranger_hears_401_before_any_csrf_check(client, document):
    for path, method, operation in _operations(document):
        if "security" not in operation:
            continue
        answer = _send(client, path, method, {}, 1)
        assert answer.status_code == 401, (path, answer.get_json())
        check_answer(answer, operation, document, path)


def test_a_valid_event_of_every_kind_gets_a_declared_answer(mechanic, document, db):
    """One generated valid body per kind, through the real rules: answered 201, 409 or 422
    (a value the rules judge), never a 5xx, and each answer as declared."""
    job = mechanic.post_json("/api/jobs", {"procedure": "exciter-removal", "engine": 1,
                                           "channel": "A"}).get_json()
    path = "/api/jobs/{job_id}/events"
    operation = document["paths"][path]["post"]
    variants = _resolve(document["components"]["schemas"]["EventIn"], document)["oneOf"]

    @settings(FUZZ, max_examples=len(variants) * 3)
    @given(st.sampled_from(variants).flatmap(lambda v: values(v, document)))
    def one_event(body):
        answer = _send(mechanic, path, "post", body, job["id"])
        check_answer(answer, operation, document, repr(body)[:200])
        assert answer.status_code != 400, answer.get_json()

    one_event()
    _no_junk_stored(db)


# --- forms and pages ---------------------------------------------------------------------------

_FIELD_NAMES = ["kind", "event_id", "step", "engine", "procedure", "channel", "items",
                "items_offered", "breaker", "tag", "to", "reason", "pin", "value", "unit",
                "text", "result", "method", "taps", "count", "window_s", "device_time",
                "action", "target", "new", "why", "repeat_from", "username", "password",
                "full_name", "roles", "signatures", "scope", "licence_kind", "licence_number",
                "expires_on", "instrument_id", "calibration_due", "status", "range_low",
                "range_high", "range_unit", "engine_hours", "starts", "part_number", "serial",
                "supply_voltage", "humidity_value", "wrench_length", "download", "next",
                "item", "how", JUNK]
_NASTY_FORM = [str(2**64 + 1), "²", "a\r\nb", "\x00", "nan", "-inf", "[[1],[2]]", "",
               "{\"a\": 1}", "9" * 400, "step_done", "reading_recorded", "sparks_counted",
               "tag_handed_over", "signed", "amendment", "returned", "approve", "return"]
_FORM_TEXT = st.one_of(st.sampled_from(_NASTY_FORM), _TEXT, st.uuids().map(str))
# Every field name at once, each with one or two values: a route reads the ones it knows.
_FORM = st.fixed_dictionaries({name: st.lists(_FORM_TEXT, min_size=1, max_size=2)
                               for name in _FIELD_NAMES})


def _routes(app, methods: set[str]) -> list[tuple[str, str, str]]:
    found = []
    for rule in app.url_map.iter_rules():
        if rule.rule.startswith(("/api/", "/static")) or not methods & set(rule.methods):
            continue
        view = app.view_functions[rule.endpoint]
        found.append((rule.rule, sorted(methods & set(rule.methods))[0],
                      ",".join(getattr(view, "allowed_roles", ()))))
    return sorted(found)


def _fill(rule: str, ids: list[int]) -> st.SearchStrategy:
    parts = re.split(r"(<[^>]+>)", rule)
    pieces = [st.sampled_from([*ids, 2**63, 2**64, 0]).map(str) if p.startswith("<int:")
              else st.one_of(st.just("identify"), _TEXT.filter(lambda t: "/" not in t and t))
              .map(lambda t: __import__("urllib.parse").parse.quote(t, safe=""))
              if p.startswith("<") else st.just(p) for p in parts]
    return st.tuples(*pieces).map("".join)


def _client_for(roles: str, login, client):
    for name, role in (("admin", "admin"), ("super", "supervisor"), ("trainer", "trainer"),
                       ("mech1", "mechanic")):
        if role in roles:
            return login(name)
    return None


@pytest.mark.parametrize("role", ["mechanic", "supervisor", "admin"])
def test_form_routes_never_answer_5xx(role, app, login, client, db):
    who = login({"mechanic": "mech1", "supervisor": "super", "admin": "admin"}[role])
    opened = login("mech1").post_json("/api/jobs", {"procedure": "exciter-removal",
                                                    "engine": 1, "channel": "A"})
    ids = [opened.get_json()["id"], 1]
    routes = [r for r in _routes(app, {"POST"}) if role in r[2] or "anyone" in r[2]]
    assert routes, role

    for route in routes:
        @FORM_FUZZ
        @given(_fill(route[0], ids), _FORM)
        def one_form(url, form):
            answer = who.client.post(url, data={**form, "csrf_token": who.token})
            answer.close()
            assert answer.status_code < 500, (url, form, answer.get_data(as_text=True)[:300])

        one_form()
    _no_junk_stored(db)


def test_pages_never_answer_5xx_to_query_text(app, login, db):
    who = login("admin")
    mech = login("mech1")
    ids = [mech.post_json("/api/jobs", {"procedure": "exciter-removal", "engine": 1,
                                        "channel": "A"}).get_json()["id"], 1]
    routes = [r for r in _routes(app, {"GET"}) if "<path:" not in r[0]]

    @FORM_FUZZ
    @given(st.sampled_from(routes), st.dictionaries(st.sampled_from(_FIELD_NAMES), _FORM_TEXT,
                                                    max_size=3))
    def one_page(route, query):
        rule, _, roles = route
        client = mech if "mechanic" in roles else who
        url = rule
        for ident in re.findall(r"<int:[^>]+>", rule):
            url = url.replace(ident, str(ids[0]))
        url = re.sub(r"<[^>]+>", "identify", url)
        answer = client.client.get(url, query_string=query)
        answer.close()  # a file answer (the worker script) holds its file open until closed
        assert answer.status_code < 500, (url, query, answer.get_data(as_text=True)[:300])

    one_page()


def test_the_fuzzers_can_fail(app, login):
    """A check that cannot fail is a defect: the schema checker rejects a wrong answer."""
    doc = {"components": {"schemas": {"E": {"type": "object", "required": ["id"],
                                            "properties": {"id": {"type": "integer"}}}}}}
    assert problems({"id": "x"}, {"$ref": "#/components/schemas/E"}, doc)
    assert problems({}, {"$ref": "#/components/schemas/E"}, doc)
    assert not problems({"id": 3}, {"$ref": "#/components/schemas/E"}, doc)
    assert problems(None, {"type": ["string"]}, doc)
    assert str(uuid.uuid4())  # the generator's ids are real UUIDs
