"""An entry that arrives after someone else recorded the same step or breaker (a tablet back
from a Wi-Fi drop-out): the refusal names the step, the tag and breaker, who recorded first
and when, and what to do at the aircraft; the person who recorded first is told on their job
page until they dismiss it."""

from __future__ import annotations

import html
import re

import pytest

from tests.web.jobs import Job, _event
from webapp.store import jobs as job_store


@pytest.fixture
def removal(mechanic, db, clock):
    job = Job(mechanic, db, clock, "exciter-removal")
    job.walk_to("breakers")
    return job


def _tag(breaker: str, number: str) -> dict:
    return _event("breakers", "breaker_tagged", breaker=breaker, tag=number)


def _told(client, job_id: int) -> list[str]:
    page = client.get(f"/jobs/{job_id}").get_data(as_text=True)
    return [html.unescape(text) for text in
            re.findall(r'data-testid="refused-after-you-text">([^<]*)<', page)]


def test_a_second_tag_on_a_breaker_names_both_tags_who_when_and_what_to_do(
        removal, login, clock):
    mech1, mech2 = removal.client, login("mech2")
    removal.ok(_tag("IGN-A", "T-8"), client=mech2)          # online, first
    refused = removal.refused(_tag("IGN-A", "T-7"), "already_tagged")  # back online, late
    reason = refused["reason"]
    assert reason.startswith("Your tag T-7 on IGN-A is not recorded: Tomas Reyes recorded "
                             "tag T-8 on IGN-A for this job at ")
    assert f"{clock():%Y-%m-%d %H:%M} UTC" in reason
    assert "Take your tag T-7 off IGN-A" in reason and "lockout/tagout procedure" in reason
    assert "{" not in reason  # plain words, no raw data

    told = _told(mech2, removal.id)
    assert told == ["An entry from Aino Varga's tablet for the lockout of IGN-A (tag T-7 on "
                    "IGN-A) was refused because you had recorded it first. Their tag T-7 may "
                    "still hang on IGN-A beside your tag T-8. Check with Aino Varga."]
    assert _told(mech1, removal.id) == []  # the refused tablet has its own message


def test_the_notice_stays_until_its_person_dismisses_it(removal, login, db):
    mech1, mech2 = removal.client, login("mech2")
    removal.ok(_tag("IGN-A", "T-8"), client=mech2)
    removal.refused(_tag("IGN-A", "T-7"), "already_tagged")
    notice_id = job_store.unread_notices(db, removal.id, 2)[0]["id"]
    url = f"/jobs/{removal.id}/notices/{notice_id}/read"
    assert mech1.post_form(url, {}).status_code == 404       # not theirs to dismiss
    assert len(_told(mech2, removal.id)) == 1
    assert mech2.post_form(url, {}).status_code == 303
    assert _told(mech2, removal.id) == []
    assert mech2.post_form(url, {}).status_code == 404       # read already
    assert mech2.post_form(f"/jobs/{removal.id}/notices/{10 ** 30}/read", {}).status_code == 404
    refusal = job_store.refusals(db, removal.id)[-1]
    assert refusal["rule"] == "already_tagged" and refusal["notice_read_at"]  # the log stays


def test_the_same_mechanic_twice_is_told_nothing_more(removal, db):
    removal.ok(_tag("IGN-A", "T-8"))
    reason = removal.refused(_tag("IGN-A", "T-7"), "already_tagged")["reason"]
    assert "you recorded tag T-8 on IGN-A" in reason
    same = removal.refused(_tag("IGN-A", "T-8"), "tag_in_use")["reason"]
    assert same.startswith("Tag T-8 on IGN-A is already recorded for this job, as yours")
    assert job_store.unread_notices(db, removal.id, 1) == []


def test_the_same_tag_entered_by_another_names_its_owner_on_record(removal, login, db):
    mech2 = login("mech2")
    removal.ok(_tag("IGN-A", "T-8"), client=mech2)
    reason = removal.refused(_tag("IGN-A", "T-8"), "tag_in_use")["reason"]
    assert reason.startswith("Your entry of tag T-8 on IGN-A is not recorded: Tomas Reyes "
                             "recorded tag T-8 on IGN-A for this job at ")
    assert "only the owner on record takes it off" in reason
    assert len(job_store.unread_notices(db, removal.id, 2)) == 1


def test_a_step_done_first_on_another_tablet(removal, login, db):
    mech2 = login("mech2")
    removal.ok(_tag("IGN-A", "T-1"), client=mech2)
    removal.ok(_tag("IGN-B", "T-2"), client=mech2)
    removal.ok(_event("breakers"), client=mech2)
    late_tag = removal.refused(_tag("IGN-A", "T-7"), "already_done")["reason"]
    assert late_tag.startswith("Your tag T-7 on IGN-A is not recorded: Step 4 was already "
                               "done by Tomas Reyes at ")
    assert "Take your tag T-7 off IGN-A" in late_tag
    late_done = removal.refused(_event("breakers"), "already_done")["reason"]
    assert late_done.startswith("Your entry for step 4 (") and "Tomas Reyes" in late_done
    told = _told(mech2, removal.id)
    assert len(told) == 2 and "(tag T-7 on IGN-A)" in told[0]
    assert "Their tag T-7 may still hang on IGN-A" in told[0]
