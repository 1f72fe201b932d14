"""Entries that waited on a tablet are placed when they were made, by the tablet's count of
their wait, under the station's decision rule (domain/placement.py): the discharge wait
served offline is accepted only with the margin, a clock that disagrees is not counted, and
the count is chained with the event."""

from __future__ import annotations

from datetime import timedelta

import pytest

from tests.web.jobs import Job, _event
from webapp.domain import placement
from webapp.domain.chain import first_broken_link
from webapp.store import jobs as job_store

REQUIRED_S = 120  # the demo exciter removal's discharge wait (its data's minimum, 2 min)


@pytest.fixture
def removal(mechanic, db, clock):
    job = Job(mechanic, db, clock, "exciter-removal")
    job.walk_to("disconnect-input")
    return job


def _made_offline(step, made, sent):
    body = _event(step)
    body["device_time"], body["sent_time"] = made.isoformat(), sent.isoformat()
    return body


def test_a_wait_served_on_the_tablets_clock_is_accepted_with_the_margin(removal, clock, db):
    # The Wi-Fi went at the disconnection; both entries reach the station together, ten
    # minutes later, from a tablet whose clock reads the station's time.
    start = clock() - timedelta(seconds=600)
    removal.ok(_made_offline("disconnect-input", start, clock()))
    served = REQUIRED_S + placement.COUNTED_WAIT_MARGIN_S
    removal.ok(_made_offline("discharge", start + timedelta(seconds=served), clock()))
    stored = job_store.events(db, removal.id)
    assert stored[-1]["device_sent"] == clock().isoformat()
    assert first_broken_link(stored) is None  # the count is chained with the event


def test_without_the_margin_the_counted_wait_is_not_over(removal, clock):
    start = clock() - timedelta(seconds=600)
    removal.ok(_made_offline("disconnect-input", start, clock()))
    short = start + timedelta(seconds=REQUIRED_S + placement.COUNTED_WAIT_MARGIN_S - 1)
    refusal = removal.refused(_made_offline("discharge", short, clock()), "discharge_wait")
    assert refusal["seconds_remaining"] == 1


def test_a_tablet_clock_that_disagrees_is_not_counted(removal, clock):
    # Its clock reads five minutes fast when it sends: the entries are placed at their
    # arrival, so the station has seen no wait at all.
    ahead = timedelta(seconds=300)
    start = clock() - timedelta(seconds=600) + ahead
    removal.ok(_made_offline("disconnect-input", start, clock() + ahead))
    done = _made_offline("discharge", start + timedelta(seconds=400), clock() + ahead)
    assert removal.refused(done, "discharge_wait")["seconds_remaining"] == REQUIRED_S


def test_a_clock_that_went_back_while_the_entry_waited_is_not_counted():
    now = placement.parse("2026-12-05T10:00:00+00:00")
    made = placement.parse("2026-12-05T10:00:10+00:00")  # "made" after it was sent
    assert placement.made_at(now, made, now) == now
    assert placement.made_at(now, now - timedelta(days=2), now) == now  # over a day
    assert placement.made_at(now, now - timedelta(seconds=90), now) == now - timedelta(
        seconds=90)
    assert placement.made_at(now, now - timedelta(seconds=90), None) == now


def test_resending_an_entry_with_a_later_sent_time_is_the_same_entry(removal, clock, db):
    start = clock() - timedelta(seconds=600)
    first = _made_offline("disconnect-input", start, clock())
    removal.ok(first)
    clock.advance(5)
    again = {**first, "sent_time": clock().isoformat()}
    answer = removal.post(again)
    assert answer.status_code == 200, answer.get_json()  # stored once, not a reused id
    assert sum(1 for e in job_store.events(db, removal.id) if e["id"] == first["id"]) == 1


def test_changing_the_chained_count_breaks_the_chain(removal, clock, db):
    start = clock() - timedelta(seconds=600)
    removal.ok(_made_offline("disconnect-input", start, clock()))
    stored = job_store.events(db, removal.id)
    stored[-1] = {**stored[-1], "device_sent": (clock() - timedelta(seconds=60)).isoformat()}
    assert first_broken_link(stored) == stored[-1]["seq"]


def test_a_claimed_wait_on_the_tablet_never_makes_a_lapsed_instrument_pass(mechanic, db, clock):
    # TW-100's calibration was due yesterday (invented). An entry claiming it was made then,
    # and waited on the tablet since, is still judged at its arrival: the station cannot
    # know when a reading was taken, so the instrument must be in calibration when it decides.
    from tests.web.jobs import exciter_removed
    from webapp.station import instruments as keeping

    exciter_removed(mechanic, db, clock)
    job = Job(mechanic, db, clock, "exciter-installation")
    job.walk_to("mounting-torque")
    keeping.add(db, instrument_id="TW-100", kind="torque wrench", range_low=20,
                range_high=100, range_unit="lbf*in", calibration_due="2026-11-30", by=None,
                now=clock())
    body = _event("mounting-torque", "reading_recorded", value="37", unit="lbf*in",
                  fastener="Bolt 1, upper forward", instrument_id="TW-100")
    body["device_time"] = (clock() - timedelta(hours=20)).isoformat()  # "yesterday"
    body["sent_time"] = clock().isoformat()
    job.refused(body, "instrument_out_of_calibration")
