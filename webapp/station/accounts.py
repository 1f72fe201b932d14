"""Enrolling people and checking log-ins (with throttling after repeated failures)."""

from __future__ import annotations

from datetime import datetime, timedelta

from werkzeug.security import check_password_hash, generate_password_hash

from .. import store
from ..records.identity import PinProblem, StationAuthority, check_pin, enrol_signer
from ..store import people, signers
from ..store.people import Person

__all__ = ["LoginRefused", "PinProblem", "enrol", "log_in"]

MIN_PASSWORD_LENGTH = 8
# Checked against when a username is unknown, so a wrong name costs the same time.
_DUMMY_HASH = generate_password_hash("not a password", method="scrypt")


class LoginRefused(Exception):
    """A log-in that did not succeed, with the sentence to show."""


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


def log_in(db: store.Database, username: str, password: str, *, now: datetime,
           max_failures: int, lock_minutes: int) -> Person:
    """The person for these credentials, or LoginRefused (also when throttled)."""
    username = username.strip()
    window_start = now - timedelta(minutes=lock_minutes)
    if people.login_failures_since(db, username, window_start) >= max_failures:
        raise LoginRefused(f"Too many failed log-ins for this name. Wait {lock_minutes} "
                           "minutes or ask an admin.")
    stored = people.password_hash_of(db, username)
    ok = check_password_hash(stored or _DUMMY_HASH, password) and stored is not None
    found = people.person_by_username(db, username) if ok else None
    with store.writing(db):  # the failure must be kept: it is what the throttle counts
        if found is None or not found.active:
            people.record_login_failure(db, username, now)
        else:
            people.clear_login_failures(db, username)
    if found is None or not found.active:
        raise LoginRefused("That username and password do not match an active account.")
    return found
