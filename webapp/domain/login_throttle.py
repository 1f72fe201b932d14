"""How long a log-in attempt must wait after failed ones: growing delays, never a fixed lock.

The rule (OWASP ASVS 4.0.3 V2.2.1: "ever increasing delays between attempts", "first log-in
on a device", no more than 100 failed attempts an hour on one account, and no lock-out any
stranger can cause):

Failed log-ins are counted over the last `memory` (24 h) in three ways, each with its own
number of free failures, after which the next attempt waits 2^(n - free) seconds after the
latest failure counted there (n failures: 1 s, 2 s, 4 s, ...), up to a longest delay:

1. the name from this address (pair): 5 free, then up to 15 min. A success from that
   address clears this count (and only this one).
2. this address, whatever the name (spraying names from one place): 20 free, up to 15 min.
3. the name, whatever the address (guessing one account from many places): 10 free, up to
   only 60 s.

A *known* address is one from which this name logged in successfully within the last
`known_days` (30 days). At a known address only rule 1 applies: failures made elsewhere,
under this name or under other names at this address, never delay the person where they
usually log in. At any other address all three apply, so an attacker who keeps failing as
"admin" from the hangar's spare tablet delays:
- themselves (rules 1 and 2, up to 15 min a try),
- "admin" at addresses admin has not logged in from, by 60 s at most (rule 3),
- "admin" at admin's own desk or tablet, not at all.
An attempt refused during a delay checks no password and is not counted, so a wait cannot
be made longer by knocking on it; a correct password during a delay is refused as well.

Bound (ASVS V2.2.1): from all unknown addresses together, rule 3 lets through 10 failures,
then waits 1, 2, ... 32 s, then one a minute: at most 74 failures in an hour on one name;
each known address adds at most 17 (5, then waits 1 s ... 512 s, then one each 15 min).
tests/domain/test_login_throttle.py counts both by simulation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime, timedelta

PAIR, ADDRESS, NAME = "pair", "address", "name"


@dataclass(frozen=True)
class ThrottlePolicy:
    """The numbers of the rule above (a station can set them in its configuration)."""

    free_per_pair: int = 5
    free_per_address: int = 20
    free_per_name: int = 10
    longest_delay: timedelta = timedelta(minutes=15)
    longest_name_delay: timedelta = timedelta(seconds=60)
    memory: timedelta = timedelta(hours=24)
    known_days: int = 30

    def free_failures(self, scope: str) -> int:
        return {PAIR: self.free_per_pair, ADDRESS: self.free_per_address,
                NAME: self.free_per_name}[scope]

    def longest(self, scope: str) -> timedelta:
        return self.longest_name_delay if scope == NAME else self.longest_delay


@dataclass(frozen=True)
class Failures:
    """Failed log-ins counted one way (not cleared, within the policy's memory)."""

    count: int = 0
    latest: datetime | None = None


@dataclass(frozen=True)
class Attempt:
    """What the station knows about an attempt before checking its password."""

    pair: Failures
    address: Failures
    name: Failures
    known_address: bool


@dataclass(frozen=True)
class Delay:
    """A wait that applies now: which count caused it, how many failures, until when."""

    scope: str
    failures: int
    until: datetime

    def seconds_left(self, now: datetime) -> int:
        """Whole seconds to wait, rounded up (so "try again in N s" is never too early)."""
        return max(1, math.ceil((self.until - now).total_seconds()))


def delay_after(failures: int, free: int, longest: timedelta) -> timedelta:
    """The wait after the latest of `failures` failures: none while fewer than `free`, then
    2^(failures - free) seconds, never longer than `longest`."""
    if failures < free:
        return timedelta(0)
    exponent = failures - free
    if exponent >= 40:  # 2^40 s is far past any cap: avoid a huge number
        return longest
    return min(timedelta(seconds=2 ** exponent), longest)


def delay_until(scope: str, failures: Failures, policy: ThrottlePolicy) -> datetime | None:
    """When the wait caused by this count ends (None when it causes none)."""
    wait = delay_after(failures.count, policy.free_failures(scope), policy.longest(scope))
    if not wait or failures.latest is None:
        return None
    return failures.latest + wait


def delay_for(attempt: Attempt, policy: ThrottlePolicy, now: datetime) -> Delay | None:
    """The longest wait that applies to this attempt now, or None when it may go ahead."""
    counts = [(PAIR, attempt.pair)]
    if not attempt.known_address:
        counts += [(ADDRESS, attempt.address), (NAME, attempt.name)]
    running = []
    for scope, failures in counts:
        until = delay_until(scope, failures, policy)
        if until is not None and until > now:
            running.append(Delay(scope, failures.count, until))
    return max(running, key=lambda d: d.until, default=None)


_WHY = {
    PAIR: "Too many failed log-ins for this name from this network address",
    ADDRESS: "Too many failed log-ins from this network address",
    NAME: "Too many failed log-ins for this name from addresses it has not logged in from "
          "lately",
}


def wait_words(seconds: int) -> str:
    """A wait as a person reads it: "40 s", "3 min 20 s", "15 min"."""
    minutes, rest = divmod(seconds, 60)
    if not minutes:
        return f"{rest} s"
    return f"{minutes} min {rest} s" if rest else f"{minutes} min"


def refusal_message(delay: Delay, now: datetime) -> str:
    """What the log-in page says: why, and exactly when to try again."""
    return (f"{_WHY[delay.scope]}: try again in {wait_words(delay.seconds_left(now))}. "
            "Until then every attempt is refused, even with the right password. "
            "An admin can lift the wait.")
