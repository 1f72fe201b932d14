"""A person sees where they are logged in and ends a session of their own, giving their
password again (OWASP ASVS 4.0.3 V3.3.4), through the real app and its session store."""

from __future__ import annotations

import re

from tests.conftest import DEMO_PASSWORDS


def _numbers(html: str) -> list[str]:
    return re.findall(r'data-testid="end-(\d+)"', html)


def _this_browser(html: str) -> str:
    row = re.search(r'value="(\d+)"[^>]*>\s*<strong data-testid="this-browser">', html)
    assert row, "the page marks the session of the browser looking at it"
    return row.group(1)


def _still_in(client) -> bool:
    return client.get("/fleet").status_code == 200


def test_a_tablet_left_logged_in_is_ended_from_the_desk(login):
    tablet, desk = login("mech1"), login("mech1")
    page = desk.get("/account/sessions").get_data(as_text=True)
    assert len(_numbers(page)) == 2
    here = _this_browser(page)
    other = next(n for n in _numbers(page) if n != here)

    wrong = desk.post_form("/account/sessions/end", {"session": other, "password": "guess"})
    assert wrong.status_code == 403
    assert "not your password" in wrong.get_data(as_text=True)
    assert _still_in(tablet), "a wrong password ends nothing"

    right = desk.post_form("/account/sessions/end", {"session": other,
                                                     "password": DEMO_PASSWORDS["mech1"]})
    assert right.status_code == 303 and "ended=1" in right.location
    assert not _still_in(tablet) and _still_in(desk)
    assert len(_numbers(desk.get("/account/sessions").get_data(as_text=True))) == 1


def test_all_but_this_browser_and_never_another_persons(login):
    first, second, me = login("mech1"), login("mech1"), login("mech1")
    someone_else = login("mech2")
    theirs = _numbers(someone_else.get("/account/sessions").get_data(as_text=True))
    refused = me.post_form("/account/sessions/end", {"session": theirs[0],
                                                     "password": DEMO_PASSWORDS["mech1"]})
    assert refused.status_code == 404 and _still_in(someone_else)

    ended = me.post_form("/account/sessions/end", {"session": "others",
                                                   "password": DEMO_PASSWORDS["mech1"]})
    assert ended.status_code == 303 and "ended=2" in ended.location
    assert not _still_in(first) and not _still_in(second) and _still_in(me)


def test_ending_this_browsers_own_session_logs_it_out(login):
    me = login("super")
    here = _this_browser(me.get("/account/sessions").get_data(as_text=True))
    answer = me.post_form("/account/sessions/end", {"session": here,
                                                    "password": DEMO_PASSWORDS["super"]})
    assert answer.status_code == 303 and answer.location.endswith("/login")
    assert not _still_in(me)


def test_guessing_the_password_here_meets_the_log_in_throttle(login):
    me = login("trainer")
    here = _this_browser(me.get("/account/sessions").get_data(as_text=True))
    answers = [me.post_form("/account/sessions/end", {"session": here, "password": "x"})
               for _ in range(8)]
    assert {a.status_code for a in answers} <= {403, 429}
    assert answers[-1].status_code == 429 and "Retry-After" in answers[-1].headers
