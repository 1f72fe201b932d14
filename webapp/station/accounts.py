"""People's accounts: enrolling, log-in (with growing delays after failures), sessions.

A session is a random 256-bit token (OWASP ASVS 4.0.3 V3.2.2 asks for at least 64 bits)
that the browser keeps in its cookie; the station keeps only its SHA-256, so a copy of
the database cannot be used to log in. Log-in makes a new one (V3.2.1); log-out, the
limits in `domain.session_limits`, revoking a person and an admin end one (V3.3.1).
The throttle's rule is `domain.login_throttle`.
"""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass, replace
from datetime import datetime, timedelta

from werkzeug.security import check_password_hash, generate_password_hash

from .. import store
from ..domain.login_throttle import (
    Attempt,
    Failures,
    ThrottlePolicy,
    delay_for,
    delay_until,
    refusal_message,
    wait_words,
)
from ..domain.session_limits import SessionLimits, needs_touch, session_over
from ..records.identity import PinProblem, StationAuthority, check_pin, enrol_signer
from ..store import people, sessions, signers
from ..store.people import Person

__all__ = ["LoginRefused", "LoginWait", "NewSession", "PinProblem", "end_sessions", "enrol",
           "lift_wait", "log_in", "log_out", "login_waits", "person_for_session",
           "revoke_access"]

MIN_PASSWORD_LENGTH = 8
LONGEST_USERNAME = 100  # longer is never a person here; only this much goes in the log
TOKEN_BYTES = 32
# Checked against when a username is unknown, so a wrong name costs the same time.
_DUMMY_HASH = generate_password_hash("not a password", method="scrypt")
NO_MATCH = "That username and password do not match an active account."


class LoginRefused(Exception):
    """A log-in that did not succeed, with the sentence to show; `retry_after` (seconds)
    when it was refused because of a wait, without checking the password."""

    def __init__(self, message: str, retry_after: int | None = None) -> None:
        super().__init__(message)
        self.retry_after = retry_after


@dataclass(frozen=True)
class NewSession:
    person: Person
    token: str  # goes to the browser only; the station keeps its hash


@dataclass(frozen=True)
class LoginWait:
    """Failures counted one way that reach the throttle, for the admin's page."""

    scope: str
    username: str | None
    address: str | None
    failures: int
    latest: datetime
    until: datetime | None  # None: no wait now, but the next failure brings one


def enrol(db: store.Database, *, username: str, full_name: str, roles: list[str],
          password: str, authorisation: str | None, now: datetime,
          pin: str | None = None, authority: StationAuthority | None = None) -> Person:
    """Add a person, and with a PIN their signing key and certificate from the station's CA;
    raises ValueError with a sentence when something is wrong (nothing is kept then)."""
    if pin is not None:
        check_pin(pin)
    username = username.strip()
    if not username or not username.replace("-", "").replace(".", "").isalnum():
        raise ValueError("a username is letters and digits (dots and dashes allowed)")
    if not full_name.strip():
        raise ValueError("the person's full name is needed")
    if not roles:
        raise ValueError("give the person at least one role")
    if len(password) < MIN_PASSWORD_LENGTH:
        raise ValueError(f"the password must be at least {MIN_PASSWORD_LENGTH} characters")
    password_hash = generate_password_hash(password, method="scrypt")
    enrolment = None
    if pin is not None:
        if authority is None:
            raise ValueError("a signing PIN needs the station's certificate authority")
        enrolment = enrol_signer(authority, full_name=full_name.strip(), username=username,
                                 authorisation=authorisation or None, pin=pin, now=now)
    with store.writing(db):
        person = people.add_person(db, username=username, full_name=full_name.strip(),
                                   roles=roles, authorisation=authorisation or None,
                                   password_hash=password_hash, now=now)
        if enrolment is not None:
            signers.add_signer(db, person.id, enrolment.cert_pem, enrolment.sealed.to_json(),
                               now)
    return person




def token_hash(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


def _attempt(db: store.Database, username: str, address: str, now: datetime,
             policy: ThrottlePolicy) -> Attempt:
    counted = people.login_failures(db, username=username, address=address,
                                    since=now - policy.memory)

    def failures(scope: str) -> Failures:
        count, latest = counted[scope]
        return Failures(count, datetime.fromisoformat(latest) if latest else None)

    known = sessions.logged_in_from(db, username, address,
                                    now - timedelta(days=policy.known_days))
    return Attempt(pair=failures("pair"), address=failures("address"), name=failures("name"),
                   known_address=known)


def _refuse_if_waiting(attempt: Attempt, policy: ThrottlePolicy, now: datetime) -> None:
    delay = delay_for(attempt, policy, now)
    if delay is not None:
        raise LoginRefused(refusal_message(delay, now), delay.seconds_left(now))


def log_in(db: store.Database, username: str, password: str, *, address: str,
           user_agent: str | None, now: datetime, policy: ThrottlePolicy,
           replacing: str | None = None) -> NewSession:
    """A new session for these credentials, or LoginRefused (a mismatch, or a wait from
    the throttle). `replacing` is the token the browser carried before, if any: it ends."""
    username = username.strip()
    logged = username[:LONGEST_USERNAME]
    _refuse_if_waiting(_attempt(db, logged, address, now, policy), policy, now)
    stored = people.password_hash_of(db, username) if len(username) <= LONGEST_USERNAME \
        else None
    ok = check_password_hash(stored or _DUMMY_HASH, password) and stored is not None
    found = people.person_by_username(db, username) if ok else None
    ok = found is not None and found.active
    token = secrets.token_urlsafe(TOKEN_BYTES)
    with store.writing(db):
        # Again under the write lock: attempts sent side by side are counted one by one.
        attempt = _attempt(db, logged, address, now, policy)
        _refuse_if_waiting(attempt, policy, now)
        if not ok or found is None:
            people.record_login_failure(db, logged, address, now)
        else:
            people.clear_login_failures(db, username=username, address=address, now=now,
                                        why="logged in")
            if replacing:
                sessions.end_session(db, token_hash(replacing), now, "logged in again")
            sessions.open_session(db, token_hash=token_hash(token), person_id=found.id,
                                  now=now, client_address=address, user_agent=user_agent)
    if not ok or found is None:
        raise LoginRefused(NO_MATCH + _next_wait(attempt, policy, now))
    return NewSession(found, token)


def _next_wait(before: Attempt, policy: ThrottlePolicy, now: datetime) -> str:
    """The wait this failure has just started, said at once (or nothing)."""
    def plus_one(f: Failures) -> Failures:
        return Failures(f.count + 1, now)

    after = replace(before, pair=plus_one(before.pair), address=plus_one(before.address),
                    name=plus_one(before.name))
    delay = delay_for(after, policy, now)
    if delay is None:
        return ""
    return f" Wait {wait_words(delay.seconds_left(now))} before the next try."


def person_for_session(db: store.Database, token: str, *, now: datetime,
                       limits: SessionLimits) -> Person | None:
    """The person a browser's token stands for now, or None: an unknown or ended session,
    one past its limits (ended here), or a person whose access was revoked."""
    found = sessions.session_by_token_hash(db, token_hash(token))
    if found is None or found.ended_at is not None:
        return None
    why = ("access revoked" if not found.person.active else
           session_over(found.created_at, found.last_seen_at, now, limits))
    if why is not None:
        with store.writing(db):
            sessions.end_session(db, found.token_hash, now, why)
        return None
    if needs_touch(found.last_seen_at, now):
        with store.writing(db):
            sessions.touch(db, found.token_hash, now)
    return found.person


def log_out(db: store.Database, token: str, now: datetime) -> None:
    with store.writing(db):
        sessions.end_session(db, token_hash(token), now, "logged out")


def end_sessions(db: store.Database, person_id: int, now: datetime, why: str) -> int:
    """End all of a person's open sessions (their tablets go to the log-in page)."""
    with store.writing(db):
        return sessions.end_sessions_of(db, person_id, now, why)


def end_own_sessions(db: store.Database, person: people.Person, password: str, *,
                     numbers: list[int], address: str, now: datetime,
                     policy: ThrottlePolicy) -> int:
    """A person ends sessions of their own (a tablet left logged in), after giving their
    password again (OWASP ASVS 4.0.3 V3.3.4): checked and throttled as a log-in is, a wrong
    one counted as a failed log-in. LoginRefused when it does not match."""
    _refuse_if_waiting(_attempt(db, person.username, address, now, policy), policy, now)
    stored = people.password_hash_of(db, person.username)
    ok = stored is not None and check_password_hash(stored, password)
    with store.writing(db):
        attempt = _attempt(db, person.username, address, now, policy)
        _refuse_if_waiting(attempt, policy, now)
        if not ok:
            people.record_login_failure(db, person.username, address, now)
        else:
            return sessions.end_numbered(db, person.id, numbers, now, "ended by its owner")
    raise LoginRefused("That is not your password: nothing was ended."
                       + _next_wait(attempt, policy, now))


def revoke_access(db: store.Database, person_id: int, now: datetime) -> None:
    """No more log-in or signing for this person; their sessions end now."""
    with store.writing(db):
        people.revoke(db, person_id, now)
        sessions.end_sessions_of(db, person_id, now, "access revoked")


def login_waits(db: store.Database, now: datetime, policy: ThrottlePolicy) -> list[LoginWait]:
    """Names, addresses and names-from-addresses whose failures reach the throttle: those
    waiting now first, then those whose next failure will bring a wait."""
    waits = []
    for group in people.login_failure_groups(db, now - policy.memory):
        if group["count"] < policy.free_failures(group["scope"]):
            continue
        latest = datetime.fromisoformat(group["latest"])
        until = delay_until(group["scope"], Failures(group["count"], latest), policy)
        waits.append(LoginWait(group["scope"], group["username"], group["address"],
                               group["count"], latest,
                               until if until is not None and until > now else None))
    return sorted(waits, key=lambda w: (w.until is None, -w.failures))


def lift_wait(db: store.Database, *, scope: str, username: str, address: str,
              now: datetime, by: Person) -> int:
    """Clear the failures behind a wait (kept in the log as lifted by `by`); how many."""
    why = f"lifted by {by.username}"
    with store.writing(db):
        if scope == "pair":
            return people.clear_login_failures(db, now=now, why=why, username=username,
                                               address=address)
        if scope == "name":
            return people.clear_login_failures(db, now=now, why=why, username=username,
                                               any_address=True)
        if scope == "address":
            return people.clear_login_failures(db, now=now, why=why, address=address)
    raise ValueError(f"no such wait: {scope}")
