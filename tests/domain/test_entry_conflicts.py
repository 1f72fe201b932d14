"""How a late entry's refusal is worded, and whom it tells (pure)."""

from __future__ import annotations

from webapp.domain import entry_conflicts
from webapp.domain.gates import Tag

NAMES = {1: "Aino Varga", 2: "Tomas Reyes"}
T8 = Tag("T-8", "IGN-A", owner_id=2, job_id=5, applied_by=2,
         applied_at="2026-12-06T10:02:31+00:00", owner_since="2026-12-06T10:02:31+00:00")


def test_times_are_shown_as_the_station_shows_them():
    assert entry_conflicts.station_time("2026-12-06T11:02:31+01:00") == "2026-12-06 10:02 UTC"
    assert entry_conflicts.station_time(None) == "an unknown time"


def test_a_second_tag_tells_the_first_tagger_and_says_what_to_do():
    refusal = entry_conflicts.breaker_already_tagged("T-7", "IGN-A", T8, 1, NAMES)
    assert refusal.rule == "already_tagged"
    assert refusal.reason.startswith("Your tag T-7 on IGN-A is not recorded: Tomas Reyes "
                                     "recorded tag T-8 on IGN-A for this job at "
                                     "2026-12-06 10:02 UTC first")
    assert "Take your tag T-7 off IGN-A" in refusal.reason
    assert refusal.details["first_person_id"] == 2
    assert "Aino Varga's tablet" in str(refusal.details["notice"])


def test_nobody_is_told_when_the_first_entry_was_ones_own():
    refusal = entry_conflicts.breaker_already_tagged("T-7", "IGN-A", T8, 2, NAMES)
    assert "you recorded tag T-8" in refusal.reason
    assert "notice" not in refusal.details and "first_person_id" not in refusal.details


def test_a_tag_number_on_another_breaker_is_a_misread_not_a_conflict():
    refusal = entry_conflicts.tag_already_recorded("T-8", "IGN-B", T8, 5, 1, NAMES)
    assert refusal.rule == "tag_in_use" and "hangs on breaker IGN-A" in refusal.reason
    assert "notice" not in refusal.details
