"""No input gets a 500; junk never enters the append-only log; replays; body size limits.

The distinct causes of HTTP 500 found (by tests/web/test_api_fuzz.py's fuzzers and by hand),
each with its regression test below, and where it is now stopped:

1. `<int:...>` route values beyond 2**63 reached SQLite (OverflowError): the `int`
   converter now takes row ids only (404).
2. `engine` beyond 2**63 in the JSON body of POST /api/jobs (OverflowError): JobIn bounds it
   (422 naming `engine`).
3. `engine` beyond 2**63 in the form POST /jobs (OverflowError): 404.
4. A lone surrogate in JSON (`"\\ud800"`, which Python's json accepts) reached SQLite when
   the refusal was logged (UnicodeEncodeError): the JSON loader refuses it (400 naming the field).
5. A list where a breaker name belongs was used as a set member (TypeError: unhashable):
   the event data's shape refuses it (422 naming `data.breaker`).
6. A non-ASCII digit ("²", for which str.isdigit() is true) in a check's items form field
   reached int() (ValueError): only ASCII digits are read.
7. A line break in the log-in page's `next` query parameter became a Location header
   (ValueError: header newline): control characters in a query are refused (400 naming it).
8. A tag consent naming a person id beyond 2**63 (`to`, JSON or form digits) reached SQLite
   when the person was looked up (OverflowError): the shape bounds `to` (422 naming `data.to`);
   the form reads ASCII digits only.

Besides: NaN and Infinity (Python's json accepts them; RFC 8259 section 6 does not) were
stored and answered as invalid JSON; they are refused with 400 now.
"""

from __future__ import annotations

import json
import logging
import uuid

from webapp.domain.chain import first_broken_link
from webapp.domain.event_data import check_event_data
from webapp.store import jobs as job_store

from .jobs import Job
from .test_api_events import counts, event, open_removal

BEYOND_64_BITS = 2**64 + 1  # SQLite INTEGER is signed 64-bit (sqlite.org/datatype3.html)


def _raw_json(client, url: str, text: str):
    return client.client.post(url, data=text.encode("utf-8", "surrogatepass"),
                              content_type="application/json",
                              headers={"X-CSRFToken": client.token})


# --- 1..8: each cause of a 500 --------------------------------------------------------------

def test_1_route_id_beyond_64_bits_is_404(mechanic):
    for url in (f"/api/jobs/{BEYOND_64_BITS}", f"/jobs/{BEYOND_64_BITS}",
                f"/fleet/engines/{BEYOND_64_BITS}"):
        answer = mechanic.get(url)
        assert answer.status_code == 404, url
    answer = mechanic.post_json(f"/api/jobs/{BEYOND_64_BITS}/events", event("identify"))
    assert answer.status_code == 404
    assert answer.get_json()["rule"] == "http_404"


def test_2_json_engine_beyond_64_bits_is_422_naming_engine(mechanic):
    answer = mechanic.post_json("/api/jobs", {"procedure": "exciter-removal",
                                              "engine": BEYOND_64_BITS, "channel": "A"})
    assert answer.status_code == 422
    assert [p["field"] for p in answer.get_json()["problems"]] == ["engine"]


def test_3_form_engine_beyond_64_bits_is_404(mechanic):
    answer = mechanic.post_form("/jobs", {"engine": str(BEYOND_64_BITS),
                                          "procedure": "exciter-removal", "channel": "A"})
    assert answer.status_code == 404


def test_4_lone_surrogate_in_json_is_400_naming_the_field(mechanic, db):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    before = counts(db, job["id"])
    body = json.dumps(event("\ud800"))  # json.dumps escapes it: "\\ud800", valid JSON text
    answer = _raw_json(mechanic, url, body)
    assert answer.status_code == 400
    assert answer.get_json()["problems"][0]["field"] == "step"
    body = json.dumps(event("identify", "reading_recorded", text="a\udfffb"))
    answer = _raw_json(mechanic, url, body)
    assert answer.status_code == 400
    assert answer.get_json()["problems"][0]["field"] == "data.text"
    assert counts(db, job["id"]) == before


def test_5_unhashable_breaker_is_422_naming_it(mechanic, db):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    mechanic.post_json(url, event("identify"))
    mechanic.post_json(url, event("selectors-off", items=[0, 1, 2]))
    mechanic.post_json(url, event("lethal-energy-breakers", "acknowledged"))
    before = counts(db, job["id"])
    answer = mechanic.post_json(url, event("breakers", "breaker_tagged", breaker=["CB1"],
                                           tag="T-9"))
    assert answer.status_code == 422
    assert answer.get_json()["problems"][0]["field"] == "data.breaker"
    assert counts(db, job["id"]) == before


def test_6_non_ascii_digit_in_items_form_is_not_read_as_an_item(mechanic, db):
    job = open_removal(mechanic)
    mechanic.post_json(f"/api/jobs/{job['id']}/events", event("identify"))
    answer = mechanic.post_form(f"/jobs/{job['id']}/steps/selectors-off", {
        "event_id": str(uuid.uuid4()), "kind": "step_done", "items_offered": "1",
        "items": ["0", "1", "²"]})
    assert answer.status_code == 409  # not every item confirmed: a rule, not a crash
    assert "selectors-off" not in {e["step_id"] for e in job_store.events(db, job["id"])}


def test_7_line_break_in_a_query_parameter_is_400_naming_it(client):
    from tests.conftest import DEMO_PASSWORDS, csrf_token_of

    # The log-in's `next` is judged by its own rule: not a plain path, so home, never a
    # header of its own.
    token = csrf_token_of(client.get("/login").get_data(as_text=True))
    answer = client.post("/login?next=/fleet%0d%0aSet-Cookie:%20x=1",
                         data={"username": "mech1", "password": DEMO_PASSWORDS["mech1"],
                               "csrf_token": token})
    assert answer.status_code == 303 and answer.headers["Location"] == "/"
    assert "x=1" not in " ".join(answer.headers.getlist("Set-Cookie"))
    answer = client.get("/login?next=/fleet%0d%0aX-Injected:%201&other=a%0ab")
    assert answer.status_code == 400 and "X-Injected" not in answer.headers
    assert "The query parameter &#39;other&#39; contains control" in answer.get_data(
        as_text=True)
    answer = client.get("/api/fleet?filter=a%0ab")
    assert answer.status_code == 400
    assert answer.get_json()["problems"] == [
        {"field": "query.filter", "problem": answer.get_json()["problems"][0]["problem"]}]


def test_taps_that_are_not_numbers_are_422(login, db, clock):
    from .jobs import Job

    mech1 = login("mech1")
    check = Job(mech1, db, clock, "ignition-functional-check", channel=None)
    check.walk_to("count-both")
    check.start_count("count-both")
    before = counts(db, check.id)
    for taps in ([[1.0], [2.0], [3.0]], [{"t": 1}, {"t": 2}], ["0.5", "1.0", "1.5"]):
        answer = check.post(event("count-both", "sparks_counted", method="taps", taps=taps))
        assert answer.status_code == 422, (taps, answer.get_json())
        assert answer.get_json()["problems"][0]["field"].startswith("data.taps"), taps
    answer = mech1.post_form(f"/jobs/{check.id}/steps/count-both", {
        "event_id": str(uuid.uuid4()), "kind": "sparks_counted", "method": "taps",
        "taps": "[[1], [2], [3]]", "supply_voltage": "28"})
    assert answer.status_code == 422
    assert counts(db, check.id) == before


def test_8_consent_naming_a_person_id_beyond_64_bits_is_422(mechanic, db):
    from tests.conftest import DEMO_PINS

    job = open_removal(mechanic)
    before = counts(db, job["id"])
    answer = mechanic.post_json(f"/api/jobs/{job['id']}/events", event(
        None, "tag_handed_over", tag="T-1", to=BEYOND_64_BITS, pin=DEMO_PINS["mech1"]))
    assert answer.status_code == 422
    assert answer.get_json()["problems"][0]["field"] == "data.to"
    for to in (str(BEYOND_64_BITS), "²"):
        answer = mechanic.post_form(f"/jobs/{job['id']}/events", {
            "event_id": str(uuid.uuid4()), "kind": "tag_handed_over", "tag": "T-1",
            "to": to, "pin": DEMO_PINS["mech1"]})
        assert answer.status_code in (409, 422), to
    assert counts(db, job["id"])[0] == before[0]


# --- NaN, Infinity, junk keys, sizes ---------------------------------------------------------

def test_nan_and_infinity_in_json_are_400_and_nothing_is_stored(mechanic, db):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    before = counts(db, job["id"])
    for constant in ("NaN", "Infinity", "-Infinity"):
        text = (f'{{"id": "{uuid.uuid4()}", "kind": "step_done", "step": "identify", '
                f'"data": {{"x": {constant}}}}}')
        answer = _raw_json(mechanic, url, text)
        assert answer.status_code == 400, constant
        body = json.loads(answer.get_data(as_text=True), parse_constant=_not_json)
        assert body["problems"][0]["field"] == "(body)"
        assert constant in body["problems"][0]["problem"]
    answer = _raw_json(mechanic, "/api/jobs", '{"procedure": "exciter-removal", '
                       '"engine": NaN}')
    assert answer.status_code == 400
    assert counts(db, job["id"]) == before


def _not_json(name: str):
    raise AssertionError(f"the answer holds {name}, which is not JSON")


def test_a_form_window_of_nan_is_422_naming_it(mechanic, db):
    job = open_removal(mechanic)
    before = counts(db, job["id"])
    answer = mechanic.post_form(f"/jobs/{job['id']}/steps/identify", {
        "event_id": str(uuid.uuid4()), "kind": "sparks_counted", "method": "timed",
        "count": "12", "window_s": "nan"})
    assert answer.status_code == 422
    assert counts(db, job["id"]) == before
    # the page shows the problem at the count step's form; the field it names:
    problem = check_event_data("sparks_counted", {"method": "timed", "window_s": float("nan")})
    assert problem is not None and problem.field == "window_s" and "finite" in problem.message
    assert counts(db, job["id"]) == before


def test_junk_key_event_is_422_and_the_chain_is_unchanged(mechanic, db, caplog):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    head = job_store.chain_head(db, job["id"])
    before = counts(db, job["id"])
    junk = "J" * 1_000
    with caplog.at_level(logging.WARNING, logger="sparkward.input"):
        answer = mechanic.post_json(url, event("identify", junk_field=junk))
    assert answer.status_code == 422
    assert answer.get_json()["problems"][0]["field"] == "data.junk_field"
    assert counts(db, job["id"]) == before
    assert job_store.chain_head(db, job["id"]) == head
    logged = [r.getMessage() for r in caplog.records if "422" in r.getMessage()]
    assert logged and all(len(line) < 600 for line in logged)  # an excerpt, not the body
    assert "junk_field" in logged[0] and junk not in logged[0]


def test_twenty_megabyte_body_is_413_and_nothing_is_stored(mechanic, db, caplog):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    before = counts(db, job["id"])
    big = event("identify", note="x" * (20 * 1024 * 1024))
    with caplog.at_level(logging.WARNING, logger="sparkward.input"):
        answer = mechanic.post_json(url, big)
    assert answer.status_code == 413
    assert answer.get_json()["rule"] == "http_413"
    assert counts(db, job["id"]) == before
    assert any("413" in r.getMessage() and "not read" in r.getMessage()
               for r in caplog.records)
    form = mechanic.post_form(f"/jobs/{job['id']}/steps/identify", {
        "event_id": str(uuid.uuid4()), "kind": "step_done", "note": "x" * 300_000})
    assert form.status_code == 413
    assert "Too much sent at once" in form.get_data(as_text=True)
    assert counts(db, job["id"]) == before


def test_body_just_under_the_limit_is_read(mechanic, app):
    limit = app.config["MAX_BODY_BYTES"]  # 256 KB (our choice, the issue's example)
    job = open_removal(mechanic)
    text = "x" * (limit - 400)
    answer = mechanic.post_json(f"/api/jobs/{job['id']}/events",
                                event("identify", "finding", text=text))
    assert answer.status_code == 422  # read and judged: too long a text, not too large a body
    assert answer.get_json()["problems"][0]["field"] == "data.text"


def test_record_check_upload_has_its_own_larger_limit(login, app):
    supervisor = login("super")
    pdf = b"%PDF-1.7\n" + b"0" * (1024 * 1024)  # 1 MB: above the form limit, below the upload's
    body = (b"--x\r\nContent-Disposition: form-data; name=\"csrf_token\"\r\n\r\n"
            + supervisor.token.encode() + b"\r\n--x\r\nContent-Disposition: form-data; "
            b"name=\"record\"; filename=\"r.pdf\"\r\nContent-Type: application/pdf\r\n\r\n"
            + pdf + b"\r\n--x--\r\n")
    answer = supervisor.client.post("/records/verify", data=body,
                                    content_type="multipart/form-data; boundary=x")
    assert answer.status_code != 413 and answer.status_code < 500
    answer.close()
    too_big = b"0" * (app.config["MAX_UPLOAD_BYTES"] + 1)  # refused by its length, unread
    answer = supervisor.client.post("/records/verify", data=too_big,
                                    content_type="multipart/form-data; boundary=x")
    assert answer.status_code == 413
    answer.close()


# --- replays ---------------------------------------------------------------------------------

def test_replayed_id_with_different_data_is_409_with_the_stored_event(mechanic, db):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    mechanic.post_json(url, event("identify"))
    first = event("selectors-off", items=[0, 1, 2])
    stored = mechanic.post_json(url, first)
    assert stored.status_code == 201
    before = counts(db, job["id"])
    for changed in ({**first, "data": {"items": [0, 1]}},
                    {**first, "device_time": "2026-12-01T08:00:06+00:00"},
                    {**first, "kind": "acknowledged", "data": {}},
                    {**first, "step": "identify"}):
        answer = mechanic.post_json(url, changed)
        assert answer.status_code == 409, changed
        assert answer.get_json()["rule"] == "event_id_reused"
        assert answer.get_json()["event"] == stored.get_json()
    assert counts(db, job["id"]) == before


def test_replayed_id_with_the_same_bytes_is_200_with_the_stored_event(mechanic, db):
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    mechanic.post_json(url, event("identify"))
    body = json.dumps(event("selectors-off", items=[0, 1, 2]))
    first = _raw_json(mechanic, url, body)
    again = _raw_json(mechanic, url, body)
    assert (first.status_code, again.status_code) == (201, 200)
    assert again.get_json() == first.get_json()
    assert first_broken_link(job_store.events(db, job["id"])) is None


class _Replaying(Job):
    """A job whose every stored event is sent a second time, byte for byte, as the outbox
    does when an answer was lost: each must be answered 200 with the stored event."""

    def post(self, body, client=None):
        first = super().post(body, client)
        if first.status_code == 201:
            again = super().post(body, client)
            assert again.status_code == 200, (body, again.get_json())
            assert again.get_json() == first.get_json()
        return first


def test_every_kind_a_walk_records_replayed_as_sent_is_200(login, db, clock):
    """Readings (converted, judged), tags, parts with usage, counts with supply and
    instruments, signatures with their PIN: all recognised as the stored event."""
    mech1 = login("mech1")
    removal = _Replaying(mech1, db, clock, "exciter-removal", channel="A")
    removal.walk_to("performer")
    kinds = {e["kind"] for e in job_store.events(db, removal.id)}
    assert {"breaker_tagged", "reading_recorded", "part_recorded", "acknowledged",
            "step_done"} <= kinds, kinds


def test_a_spark_count_replayed_as_sent_is_200(login, db, clock):
    mech1, mech2 = login("mech1"), login("mech2")
    check = _Replaying(mech1, db, clock, "ignition-functional-check", channel=None)
    check.walk_to("count-both")
    check.count("count-both", method="timed", count=70, window_s=30, client=mech2)
    check.walk_to("sign-selector")
    assert "sparks_counted" in {e["kind"] for e in job_store.events(db, check.id)}


def test_a_form_sent_twice_is_stored_once_and_a_changed_one_is_409(mechanic, db):
    job = open_removal(mechanic)
    event_id = str(uuid.uuid4())
    form = {"event_id": event_id, "kind": "step_done",
            "device_time": "2026-12-01T08:00:05.000Z"}
    first = mechanic.post_form(f"/jobs/{job['id']}/steps/identify", form)
    again = mechanic.post_form(f"/jobs/{job['id']}/steps/identify", form)
    assert (first.status_code, again.status_code) == (303, 303)
    changed = mechanic.post_form(f"/jobs/{job['id']}/steps/identify",
                                 {**form, "device_time": "2026-12-01T09:00:05.000Z"})
    assert changed.status_code == 409
    assert [e["id"] for e in job_store.events(db, job["id"])].count(event_id) == 1


def test_a_resend_is_told_by_what_was_sent_not_only_by_what_was_kept(mechanic, db):
    """The station keeps what it derived; the request's digest tells a resend (same JSON,
    whatever its key order or spacing) from a reused id (any change at all). For events
    stored before digests were kept, the stored fields decide."""
    job = open_removal(mechanic)
    url = f"/api/jobs/{job['id']}/events"
    mechanic.post_json(url, event("identify"))
    sent = event("selectors-off", items=[0, 1, 2])
    assert _raw_json(mechanic, url, json.dumps(sent)).status_code == 201
    respaced = json.dumps(dict(reversed(list(sent.items()))), indent=3)
    assert _raw_json(mechanic, url, respaced).status_code == 200
    assert mechanic.post_json(url, {**sent, "data": {"items": [0, 2, 1]}}).status_code == 409
    db.execute("delete from event_requests where event_id = ?", [sent["id"]])  # an old row
    db.conn.commit()
    assert mechanic.post_json(url, sent).status_code == 200
    assert mechanic.post_json(url, {**sent, "data": {"items": [0, 1]}}).status_code == 409
