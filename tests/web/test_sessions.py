"""Sessions kept on the station: log-out, limits, revocation and rotation end them for good."""

from __future__ import annotations

import hashlib
import re
from datetime import UTC, datetime, timedelta
from email.utils import parsedate_to_datetime

import pytest

from tests.conftest import LoggedIn, csrf_token_of
from webapp import create_app, store


def _cookie(client) -> str:
    found = client.get_cookie("session")
    assert found is not None, "a logged-in client carries the session cookie"
    return found.value


def _session_data(app, client) -> dict:
    """What Flask's signed cookie holds (signed, not secret: that is why the station keeps
    only a hash of the token it carries)."""
    return app.session_interface.get_signing_serializer(app).loads(_cookie(client))


def _copy_of(app, client):
    """A second browser that has been given a copy of the first one's cookie."""
    thief = app.test_client()
    thief.set_cookie("session", _cookie(client))
    return thief


def _rows(db, person_username=None):
    sql = "select s.* from sessions s join people p on p.id = s.person_id"
    args = []
    if person_username:
        sql += " where p.username = ?"
        args.append(person_username)
    return list(db.query(sql + " order by s.created_at, s.rowid", args))


def _is_logged_in(client) -> bool:
    answer = client.get("/api/fleet")
    assert answer.status_code in (200, 401), answer.status_code
    return answer.status_code == 200


def test_log_out_ends_the_session_so_a_copied_cookie_stops_working(app, login, db):
    mech1 = login("mech1")
    thief = _copy_of(app, mech1.client)
    assert _is_logged_in(thief)  # the copy works while the session is open...
    assert mech1.post_form("/logout", {}).status_code == 303
    # ...and not after log-out: 401 JSON for the API, the log-in page for pages.
    answer = thief.get("/api/fleet")
    assert answer.status_code == 401 and answer.get_json()["rule"] == "http_401"
    page = thief.get("/fleet")
    assert page.status_code == 302 and page.location.startswith("/login?next=")
    [row] = _rows(db, "mech1")
    assert row["ended_why"] == "logged out" and row["ended_at"] is not None


def test_the_station_keeps_only_a_hash_of_the_token(app, mechanic, db):
    token = _session_data(app, mechanic.client)["session_token"]
    assert len(token) >= 43  # 32 random bytes in URL-safe base64 (ASVS 4.0.3 V3.2.2: >= 64 bits)
    [row] = _rows(db, "mech1")
    assert row["token_hash"] == hashlib.sha256(token.encode()).hexdigest()
    everything = "\n".join(str(v) for r in db.query("select * from sessions") for v in r.values())
    assert token not in everything
    # Someone who reads the database and sets the hash as their token gets nowhere.
    forged = app.test_client()
    with forged.session_transaction() as s:
        s["session_token"] = row["token_hash"]
    assert not _is_logged_in(forged)


def test_an_old_cookie_naming_a_person_is_no_longer_a_log_in(app):
    # Before sessions were kept on the station the signed cookie held person_id and lasted
    # 31 days; such a cookie (validly signed with the station's key) must not log anyone in.
    old = app.test_client()
    with old.session_transaction() as s:
        s["person_id"] = 1
    assert not _is_logged_in(old)


def test_log_in_makes_a_new_session_and_a_new_form_token(app, login, db):
    client = app.test_client()
    before = login("mech2")  # a session planted in this browser (fixation) is replaced
    client.set_cookie("session", _cookie(before.client))
    planted = _session_data(app, client)
    LoggedIn(client, "mech1")
    after = _session_data(app, client)
    assert after["session_token"] != planted["session_token"]
    assert after["csrf_token"] != planted.get("csrf_token")
    assert _is_logged_in(client)
    mech1_id = db.execute("select id from people where username = 'mech1'").fetchone()[0]
    assert f'name="sparkward-person-id" content="{mech1_id}"' in client.get(
        "/fleet").get_data(as_text=True)
    # The planted session ended when this browser logged in over it.
    [mech2_row] = _rows(db, "mech2")
    assert mech2_row["ended_why"] == "logged in again"
    assert not _is_logged_in(before.client)


@pytest.fixture
def short_idle_app(db_path, clock):
    return create_app({"DB_PATH": str(db_path), "SECRET_KEY": "test-secret", "TESTING": True,
                       "CLOCK": clock, "SESSION_IDLE_MINUTES": 30})


def test_a_session_ends_after_the_idle_limit_but_use_keeps_it_alive(short_idle_app, clock,
                                                                    db):
    mech1 = LoggedIn(short_idle_app.test_client(), "mech1")
    for _ in range(4):  # used every 29 minutes for two hours: still logged in
        clock.advance(29 * 60)
        assert _is_logged_in(mech1.client)
    clock.advance(30 * 60)
    assert not _is_logged_in(mech1.client)
    [row] = _rows(db, "mech1")
    assert row["ended_why"] == "idle limit"
    # Coming back does not revive it.
    clock.advance(-31 * 60)
    assert not _is_logged_in(mech1.client)


def test_by_default_a_tablet_unused_for_a_shift_is_logged_out(clock, mechanic, db):
    clock.advance(8 * 3600 + 1)           # untouched since log-in, under the 12 h limit
    assert not _is_logged_in(mechanic.client)
    [row] = _rows(db, "mech1")
    assert row["ended_why"] == "idle limit"


def test_the_default_limits_end_a_session_twelve_hours_after_log_in(app, clock, mechanic, db):
    assert app.config["SESSION_IDLE_MINUTES"] == 8 * 60   # a shift (common practice, no source)
    assert app.config["SESSION_ABSOLUTE_HOURS"] == 12  # ASVS 4.0.3 V3.3.2, level 2: 12 hours
    for _ in range(3):                    # used every 4 hours: never idle for a shift
        clock.advance(4 * 3600 - 60)
        assert _is_logged_in(mechanic.client)
    clock.advance(3 * 60 - 1)             # 11 h 59 min 59 s after log-in: still in
    assert _is_logged_in(mechanic.client)
    clock.advance(1)  # busy or not, twelve hours after log-in it ends
    assert not _is_logged_in(mechanic.client)
    [row] = _rows(db, "mech1")
    assert row["ended_why"] == "absolute limit"


def test_last_used_is_written_at_most_once_a_minute(clock, mechanic, db):
    def last_seen():
        return _rows(db, "mech1")[0]["last_seen_at"]

    logged_in_at = last_seen()
    clock.advance(59)
    assert _is_logged_in(mechanic.client) and last_seen() == logged_in_at
    clock.advance(1)
    assert _is_logged_in(mechanic.client) and last_seen() == clock().isoformat()


def test_the_cookie_is_http_only_same_site_and_lasts_no_longer_than_a_session(app, clock):
    client = app.test_client()
    token = csrf_token_of(client.get("/login").get_data(as_text=True))
    answer = client.post("/login", data={"username": "mech1", "password": "demo-mech1",
                                         "csrf_token": token})
    cookie = answer.headers["Set-Cookie"]
    assert "HttpOnly" in cookie and "SameSite=Lax" in cookie
    # Flask dates the cookie by the real clock, not the station's: about 12 h from now.
    expires = parsedate_to_datetime(re.search(r"Expires=([^;]+)", cookie).group(1))
    assert abs(expires - (datetime.now(UTC) + timedelta(hours=12))) < timedelta(minutes=1)


def test_the_cookie_is_secure_when_the_station_serves_https(db_path, clock):
    app = create_app({"DB_PATH": str(db_path), "SECRET_KEY": "test-secret", "TESTING": True,
                      "CLOCK": clock, "SESSION_COOKIE_SECURE": True})
    client = app.test_client()
    token = csrf_token_of(client.get("/login").get_data(as_text=True))
    answer = client.post("/login", data={"username": "mech1", "password": "demo-mech1",
                                         "csrf_token": token})
    assert answer.status_code == 303 and "Secure" in answer.headers["Set-Cookie"]


def test_revoking_a_person_ends_their_sessions(login, db):
    admin, mech1, tablet = login("admin"), login("mech1"), login("mech1")
    person_id = db.execute("select id from people where username = 'mech1'").fetchone()[0]
    assert admin.post_form(f"/people/{person_id}/revoke", {}).status_code == 303
    assert not _is_logged_in(mech1.client) and not _is_logged_in(tablet.client)
    assert {r["ended_why"] for r in _rows(db, "mech1")} == {"access revoked"}


def test_a_revoked_person_with_a_session_still_open_is_refused(mechanic, db):
    # A person made inactive by some other path than the admin's page: the open session row
    # does not let them in.
    with store.writing(db):
        db.execute("update people set active = 0 where username = 'mech1'")
    assert not _is_logged_in(mechanic.client)


def test_an_admin_logs_a_person_out_everywhere_and_they_can_log_in_again(app, login, db):
    admin, mech1, tablet = login("admin"), login("mech1"), login("mech1")
    page = admin.get("/people").get_data(as_text=True)
    assert "2 sessions, last used" in page
    person_id = db.execute("select id from people where username = 'mech1'").fetchone()[0]
    # Not for anyone else, and not without the form token.
    assert mech1.post_form(f"/people/{person_id}/sessions/end", {}).status_code == 403
    assert admin.client.post(f"/people/{person_id}/sessions/end").status_code == 400
    assert _is_logged_in(tablet.client)
    assert admin.post_form(f"/people/{person_id}/sessions/end", {}).status_code == 303
    assert not _is_logged_in(mech1.client) and not _is_logged_in(tablet.client)
    assert {r["ended_why"] for r in _rows(db, "mech1")} == {"ended by admin"}
    assert _is_logged_in(login("mech1").client)
    assert _is_logged_in(admin.client)  # the admin's own session is untouched


def test_an_ended_session_sends_a_tablets_queued_write_to_log_in_not_to_refused(
        short_idle_app, clock, db):
    """The outbox (static/js/outbox.js) keeps an entry when its POST is redirected to
    /login and drops it into "not accepted" on any other 4xx: after the idle limit a
    step POST with the page's form token must be redirected, not refused."""
    mech1 = LoggedIn(short_idle_app.test_client(), "mech1")
    opened = mech1.post_json("/api/jobs", {"procedure": "exciter-removal", "engine": 1,
                                           "channel": "A"})
    assert opened.status_code == 201
    job_id = opened.get_json()["id"]
    clock.advance(31 * 60)
    answer = mech1.client.post(f"/jobs/{job_id}/steps/identify",
                               data={"csrf_token": mech1.token, "event_id": "e-1"},
                               headers={"HX-Request": "true"})
    assert answer.status_code == 302
    assert answer.location.startswith(f"/login?next=/jobs/{job_id}/steps/identify")
    assert db["events"].count == 1  # only job_opened
