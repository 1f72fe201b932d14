"""The log-in throttle through the app: growing delays per name and address, truthful
messages, nobody kept out by a stranger, and an admin who can see and lift a wait."""

from __future__ import annotations

import re
import threading

import pytest

from tests.conftest import DEMO_PASSWORDS, csrf_token_of
from webapp import store
from webapp.store import people

RIGHT = DEMO_PASSWORDS


class Device:
    """A browser at one network address (the test client's REMOTE_ADDR)."""

    def __init__(self, app, address: str) -> None:
        self.client = app.test_client()
        self.client.environ_base["REMOTE_ADDR"] = address
        self.address = address

    def log_in(self, username: str, password: str):
        token = csrf_token_of(self.client.get("/login").get_data(as_text=True))
        return self.client.post("/login", data={"username": username, "password": password,
                                                "csrf_token": token})


def _error(answer) -> str:
    found = re.search(r'data-testid="login-error">.*?</span>\s*(.*?)</p>',
                      answer.get_data(as_text=True), re.S)
    assert found, "a refused log-in says why"
    return found.group(1)


def _wait_said(answer) -> int:
    """The wait the page announces, in seconds ("try again in 3 min 20 s")."""
    found = re.search(r"(?:try again in|Wait) (?:(\d+) min)? ?(?:(\d+) s)?", _error(answer))
    assert found and (found.group(1) or found.group(2)), _error(answer)
    return int(found.group(1) or 0) * 60 + int(found.group(2) or 0)


def _seed(db, clock, username, address, times):
    """Failures made earlier, written straight to the station's table (each failure through
    the app costs a deliberately slow password hash; the ones a test is about go through
    the app)."""
    with store.writing(db):
        for _ in range(times):
            people.record_login_failure(db, username, address, clock())


def _fail(device, username, times, clock=None):
    """Fail `times` times, waiting out each announced wait on the station's clock."""
    for _ in range(times):
        answer = device.log_in(username, "wrong-password")
        if answer.status_code == 429:
            assert clock is not None, _error(answer)
            clock.advance(_wait_said(answer))
            answer = device.log_in(username, "wrong-password")
        assert answer.status_code == 401, _error(answer)
    return answer


def test_each_failure_beyond_five_doubles_the_wait_and_the_message_is_exact(app, clock, db):
    tablet = Device(app, "10.0.0.21")
    _seed(db, clock, "mech1", "10.0.0.21", 4)
    last = _fail(tablet, "mech1", 1)
    assert "do not match" in _error(last) and _wait_said(last) == 1  # said at once
    for expected in (1, 2, 4, 8):  # 2^(n - 5) s after the n-th failure
        # The right password is refused while the wait runs, and the page says for how long.
        early = tablet.log_in("mech1", RIGHT["mech1"])
        assert early.status_code == 429
        assert early.headers["Retry-After"] == str(expected)  # RFC 6585 section 4, RFC 9110
        assert _error(early).startswith(
            "Too many failed log-ins for this name from this network address: try again in "
            f"{expected} s.")
        clock.advance(expected - 1)
        assert tablet.log_in("mech1", RIGHT["mech1"]).status_code == 429  # a second early
        clock.advance(1)
        failed = tablet.log_in("mech1", "wrong-password")  # exactly on time: checked, wrong
        assert failed.status_code == 401 and _wait_said(failed) == expected * 2
    clock.advance(16)
    assert tablet.log_in("mech1", RIGHT["mech1"]).status_code == 303


def test_the_wait_stops_growing_at_fifteen_minutes(app, clock, db):
    tablet = Device(app, "10.0.0.22")
    _seed(db, clock, "mech2", "10.0.0.22", 16)  # the 15th and 16th would be 1024 and 2048 s
    early = tablet.log_in("mech2", RIGHT["mech2"])
    assert early.status_code == 429 and early.headers["Retry-After"] == "900"
    assert "try again in 15 min." in _error(early)
    clock.advance(900)
    assert tablet.log_in("mech2", RIGHT["mech2"]).status_code == 303


def test_knocking_during_a_wait_does_not_make_it_longer(app, clock, db):
    tablet = Device(app, "10.0.0.23")
    _seed(db, clock, "mech1", "10.0.0.23", 6)  # wait: 2 s
    for _ in range(5):
        assert tablet.log_in("mech1", "wrong-password").status_code == 429
    assert db.execute("select count(*) from login_failures where username = 'mech1'"
                      ).fetchone()[0] == 6
    clock.advance(2)
    assert tablet.log_in("mech1", RIGHT["mech1"]).status_code == 303


def test_a_success_clears_the_count_for_that_name_and_address(app, clock, db):
    tablet = Device(app, "10.0.0.24")
    _seed(db, clock, "mech1", "10.0.0.24", 4)
    _seed(db, clock, "mech1", "10.0.0.25", 4)
    assert tablet.log_in("mech1", RIGHT["mech1"]).status_code == 303
    last = _fail(tablet, "mech1", 1)  # the fifth here, had the four not been cleared
    assert "Wait" not in _error(last)
    # Another address's count for the name is its own: not cleared by this success.
    assert "Wait 1 s" in _error(_fail(Device(app, "10.0.0.25"), "mech1", 1))


def test_an_unknown_name_is_throttled_like_a_real_one(app, clock, db):
    # Same counts, same words: the throttle does not tell which names exist.
    tablet = Device(app, "10.0.0.26")
    for name in ("mech1", "no-such-person"):
        _seed(db, clock, name, "10.0.0.26", 4)
        assert _wait_said(_fail(tablet, name, 1)) == 1
        early = tablet.log_in(name, "anything")
        assert early.status_code == 429
        assert _error(early).startswith("Too many failed log-ins for this name from this "
                                        "network address: try again in 1 s.")


def test_one_address_trying_many_names_waits_but_other_addresses_do_not(app, clock, db):
    sprayer = Device(app, "10.0.0.66")
    for n in range(19):  # 20 names, one try each: no name reaches its own count
        _seed(db, clock, f"guess{n}", "10.0.0.66", 1)
    assert sprayer.log_in("guess19", "Winter2026").status_code == 401
    early = sprayer.log_in("mech2", RIGHT["mech2"])
    assert early.status_code == 429
    assert _error(early).startswith("Too many failed log-ins from this network address: "
                                    "try again in 1 s.")
    assert Device(app, "10.0.0.67").log_in("mech2", RIGHT["mech2"]).status_code == 303


def test_people_who_logged_in_from_an_address_are_not_held_up_by_others_failing_there(
        app, clock, db):
    shared = Device(app, "10.0.0.70")  # the hangar's shared tablet
    assert shared.log_in("mech1", RIGHT["mech1"]).status_code == 303
    for n in range(25):
        _seed(db, clock, f"guess{n}", "10.0.0.70", 1)
    _seed(db, clock, "mech1", "10.0.0.71", 30)  # and mech1's name elsewhere
    assert shared.log_in("mech2", RIGHT["mech2"]).status_code == 429  # new here: waits
    assert shared.log_in("mech1", RIGHT["mech1"]).status_code == 303  # known here: does not


def test_an_attacker_cannot_keep_the_admin_out(app, clock, db):
    desk = Device(app, "10.0.0.5")
    assert desk.log_in("admin", RIGHT["admin"]).status_code == 303  # admin's usual desk
    attacker = Device(app, "10.6.6.6")
    _seed(db, clock, "admin", "10.6.6.6", 29)  # every attempt the station allowed, for a while
    clock.advance(900)
    _fail(attacker, "admin", 1)
    # The attacker waits longer and longer...
    assert attacker.log_in("admin", RIGHT["admin"]).headers["Retry-After"] == "900"
    # ...the admin at the usual desk is not held up at all...
    assert desk.log_in("admin", RIGHT["admin"]).status_code == 303
    # ...and at a desk never used before, by a minute at most, said as such.
    laptop = Device(app, "10.0.0.99")
    early = laptop.log_in("admin", RIGHT["admin"])
    assert early.status_code == 429 and int(early.headers["Retry-After"]) <= 60
    assert _error(early).startswith("Too many failed log-ins for this name from addresses "
                                    "it has not logged in from lately: try again in")
    clock.advance(int(early.headers["Retry-After"]))
    assert laptop.log_in("admin", RIGHT["admin"]).status_code == 303


def test_attempts_sent_side_by_side_are_counted_one_by_one(app, clock, db):
    _seed(db, clock, "mech1", "10.0.0.31", 4)
    tokens = []
    clients = []
    for _ in range(8):
        client = app.test_client()
        client.environ_base["REMOTE_ADDR"] = "10.0.0.31"
        tokens.append(csrf_token_of(client.get("/login").get_data(as_text=True)))
        clients.append(client)
    answers: list[int] = []
    start = threading.Barrier(len(clients))

    def knock(client, token):
        start.wait()
        answers.append(client.post("/login", data={
            "username": "mech1", "password": "wrong-password", "csrf_token": token}).status_code)

    threads = [threading.Thread(target=knock, args=pair) for pair in zip(clients, tokens,
                                                                          strict=True)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=60)
    # The fifth failure starts a wait; the seven sent beside it are refused, not counted.
    assert sorted(answers) == [401] + [429] * 7
    assert db.execute("select count(*) from login_failures where username = 'mech1'"
                      ).fetchone()[0] == 5


def test_successful_log_ins_are_never_throttled(app):
    # The browser tests log in many times from 127.0.0.1 with the right password.
    tablet = Device(app, "127.0.0.1")
    for _ in range(7):  # more than any count's free failures would allow, were they counted
        assert tablet.log_in("mech1", RIGHT["mech1"]).status_code == 303


def test_the_admin_sees_a_wait_and_lifts_it(app, login, clock, db):
    tablet = Device(app, "10.0.0.40")
    _seed(db, clock, "mech1", "10.0.0.40", 8)
    assert tablet.log_in("mech1", RIGHT["mech1"]).status_code == 429
    admin = login("admin")
    page = admin.get("/people").get_data(as_text=True)
    row = re.search(r'<tr data-testid="wait-pair-mech1-10\.0\.0\.40">(.*?)</tr>', page, re.S)
    assert row, "the admin's page lists the wait"
    assert '<td data-label="Failures">8</td>' in row.group(1)
    assert "waiting until 08:" in row.group(1)  # the test clock's morning
    form = {"scope": "pair", "username": "mech1", "address": "10.0.0.40"}
    # Only an admin, only with the form token.
    assert login("mech2").post_form("/login-waits/lift", form).status_code == 403
    assert admin.client.post("/login-waits/lift", data=form).status_code == 400
    assert tablet.log_in("mech1", RIGHT["mech1"]).status_code == 429
    assert admin.post_form("/login-waits/lift", form).status_code == 303
    assert tablet.log_in("mech1", RIGHT["mech1"]).status_code == 303
    # The failures stay in the log, marked as lifted by whom.
    kept = list(db.query("select cleared_why from login_failures where username = 'mech1'"))
    assert len(kept) == 8 and {r["cleared_why"] for r in kept} == {"lifted by admin"}
    assert 'data-testid="no-login-waits"' in admin.get("/people").get_data(as_text=True)


def test_the_admin_lifts_a_wait_on_a_name_from_everywhere(app, login, clock, db):
    for n in range(10):  # ten strangers, one failure each: the name waits elsewhere
        _seed(db, clock, "mech2", f"10.1.0.{n}", 1)
    newcomer = Device(app, "10.1.0.200")
    assert newcomer.log_in("mech2", RIGHT["mech2"]).status_code == 429
    admin = login("admin")
    assert 'data-testid="wait-name-mech2-"' in admin.get("/people").get_data(as_text=True)
    assert admin.post_form("/login-waits/lift", {"scope": "name", "username": "mech2",
                                                 "address": ""}).status_code == 303
    assert newcomer.log_in("mech2", RIGHT["mech2"]).status_code == 303


@pytest.mark.parametrize(("form", "field"), [
    ({"scope": "everything", "username": "mech1", "address": "10.0.0.1"}, "scope"),
    ({"scope": "pair", "username": "", "address": "10.0.0.1"}, "username"),
    ({"scope": "address", "username": "", "address": ""}, "address"),
])
def test_a_lift_that_names_nothing_is_refused_and_clears_nothing(login, clock, db, form,
                                                                 field):
    _seed(db, clock, "mech1", "10.0.0.1", 5)
    answer = login("admin").post_form("/login-waits/lift", form)
    assert answer.status_code == 400 and f"{field}:" in answer.get_data(as_text=True)
    assert db.execute("select count(*) from login_failures where cleared_at is null"
                      ).fetchone()[0] == 5
