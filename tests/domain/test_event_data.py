"""The shape of each event kind's data, and the digest that tells a resend from a reused id."""

from __future__ import annotations

import pytest

from webapp.domain.event_data import check_event_data, request_digest

BASE = (7, "reading_recorded", "gap", {"value": 0.51, "unit": "mm", "pin": "123456"},
        "2026-12-01T08:00:00+00:00")


def test_the_digest_ignores_key_order_and_the_pin_only():
    job, kind, step, data, device_time = BASE
    digest = request_digest(*BASE)
    assert len(digest) == 64 and int(digest, 16) >= 0        # SHA-256, hex (FIPS 180-4)
    reordered = dict(reversed(list(data.items())))
    assert request_digest(job, kind, step, reordered, device_time) == digest
    assert request_digest(job, kind, step, {**data, "pin": "654321"}, device_time) == digest
    for changed in ((8, kind, step, data, device_time),
                    (job, "finding", step, data, device_time),
                    (job, kind, "gap-b", data, device_time),
                    (job, kind, None, data, device_time),
                    (job, kind, step, {**data, "value": 0.52}, device_time),
                    (job, kind, step, {**data, "value": "0.51"}, device_time),
                    (job, kind, step, {**data, "note": "x"}, device_time),
                    (job, kind, step, data, None)):
        assert request_digest(*changed) != digest, changed


@pytest.mark.parametrize("kind, data, field", [
    ("step_done", {"items": [0, 1], "colour": "red"}, "colour"),
    ("breaker_tagged", {"breaker": ["IGN-A"], "tag": "T-1"}, "breaker"),
    ("reading_recorded", {"value": float("nan")}, "value"),
    ("reading_recorded", {"value": float("inf")}, "value"),
    ("breaker_tagged", {"breaker": "IGN-A", "tag": "T" * 10_000}, "tag"),
])
def test_junk_wrong_types_and_non_finite_numbers_are_refused_naming_the_field(kind, data,
                                                                             field):
    problem = check_event_data(kind, data)
    assert problem is not None and field in problem.field, problem


def test_every_key_a_kind_carries_is_accepted():
    assert check_event_data("breaker_tagged", {"breaker": "IGN-A", "tag": "T-0101"}) is None
    assert check_event_data("step_done", {"items": [0, 1, 2]}) is None
    assert check_event_data("reading_recorded", {"value": 0.51, "unit": "mm"}) is None
