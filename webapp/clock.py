"""The station's clock: every rule uses the station's receipt time from here.

Tests put a settable clock in the app's configuration (CLOCK) to move time
without sleeping.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta


def system_clock() -> datetime:
    return datetime.now(UTC)


class ManualClock:
    """A clock that only moves when told to."""

    def __init__(self, start: datetime | None = None) -> None:
        self.now = start or datetime(2026, 12, 1, 8, 0, tzinfo=UTC)

    def __call__(self) -> datetime:
        return self.now

    def advance(self, seconds: float) -> None:
        self.now += timedelta(seconds=seconds)
