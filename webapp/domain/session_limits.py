"""When a log-in session ends by itself: an idle limit and an absolute limit.

OWASP ASVS 4.0.3 V3.3.2 (level 2): re-authenticate after 12 hours, or 30 minutes of
inactivity. The station keeps the 12 hours as its absolute limit and, for the hangar, an
idle limit of a shift (8 h by default) instead of 30 minutes: a tablet lies still for long
stretches during discharge waits, cooling periods and breaks, and a log-out mid-job costs a
gloved mechanic more than the risk it removes on a LAN-only station; a tablet left unused
for a whole shift is logged out. A station that wants a short idle log-out (a desk in an
open office) sets SESSION_IDLE_MINUTES lower, e.g. 30.

The last time a session was used is written at most once a minute (a write on every tap
would cost the step page), so the idle limit is kept to within a minute.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta

IDLE, ABSOLUTE = "idle limit", "absolute limit"
TOUCH_EVERY = timedelta(minutes=1)


@dataclass(frozen=True)
class SessionLimits:
    idle: timedelta = timedelta(hours=8)
    absolute: timedelta = timedelta(hours=12)


def session_over(created_at: datetime, last_seen_at: datetime, now: datetime,
                 limits: SessionLimits) -> str | None:
    """Why a session has ended by itself (ABSOLUTE or IDLE), or None while it may go on."""
    if now - created_at >= limits.absolute:
        return ABSOLUTE
    if now - last_seen_at >= limits.idle:
        return IDLE
    return None


def needs_touch(last_seen_at: datetime, now: datetime) -> bool:
    """Whether to write the session's last-seen time now (at most once a minute)."""
    return now - last_seen_at >= TOUCH_EVERY
