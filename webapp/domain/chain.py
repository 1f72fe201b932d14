"""The event chain: each event's SHA-256 covers its content and the previous hash."""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable, Mapping
from typing import Any

GENESIS = "0" * 64
CHAINED_FIELDS = ("id", "job_id", "seq", "step_id", "kind", "data", "person_id",
                  "device_time", "received_at", "prev_hash")


# Chained only when present: an entry that waited on a tablet carries when the tablet sent
# it (domain/placement.py); every other event's digest is as it always was.
CHAINED_WHEN_PRESENT = ("device_sent",)


def event_digest(event: Mapping[str, Any]) -> str:
    """SHA-256 over the chained fields of one event, as canonical JSON."""
    body = {name: event[name] for name in CHAINED_FIELDS}
    body.update({name: event[name] for name in CHAINED_WHEN_PRESENT
                 if event.get(name) is not None})
    text = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def first_broken_link(events: Iterable[Mapping[str, Any]]) -> int | None:
    """The seq of the first event whose hash or link does not hold, or None if all do."""
    previous = GENESIS
    for expected_seq, event in enumerate(events, start=1):
        if (event["seq"] != expected_seq or event["prev_hash"] != previous
                or event_digest(event) != event["hash"]):
            return int(event["seq"])
        previous = event["hash"]
    return None
