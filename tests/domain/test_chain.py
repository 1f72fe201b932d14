"""The event chain: any change to a chained field or the order of events is detected."""

from __future__ import annotations

import hashlib
import json

from webapp.domain.chain import GENESIS, event_digest, first_broken_link


def _chain(n: int) -> list[dict]:
    events, previous = [], GENESIS
    for seq in range(1, n + 1):
        event = {"id": f"e{seq}", "job_id": 7, "seq": seq, "step_id": f"s{seq}",
                 "kind": "step_done", "data": {"n": seq}, "person_id": 1,
                 "device_time": None, "received_at": f"2026-12-01T08:00:{seq:02d}+00:00",
                 "prev_hash": previous}
        event["hash"] = event_digest(event)
        previous = event["hash"]
        events.append(event)
    return events


def test_digest_is_sha256_of_canonical_json():
    event = _chain(1)[0]
    body = {k: event[k] for k in ("id", "job_id", "seq", "step_id", "kind", "data",
                                  "person_id", "device_time", "received_at", "prev_hash")}
    text = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    # FIPS 180-4 SHA-256 via the standard library, independent of our helper.
    assert event["hash"] == hashlib.sha256(text.encode()).hexdigest()


def test_intact_chain_has_no_broken_link():
    assert first_broken_link(_chain(5)) is None
    assert first_broken_link([]) is None


def test_changed_data_is_found_at_its_event():
    events = _chain(5)
    events[2] = {**events[2], "data": {"n": 99}}
    assert first_broken_link(events) == 3


def test_removed_event_is_found():
    events = _chain(5)
    del events[1]
    assert first_broken_link(events) == 3


def test_rehashed_forgery_still_breaks_the_next_link():
    events = _chain(4)
    forged = {**events[1], "data": {"n": 0}}
    forged["hash"] = event_digest(forged)
    events[1] = forged
    assert first_broken_link(events) == 3
