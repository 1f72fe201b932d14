"""Who may sign what: a person's authorisations, and the one that covers a signature.

An authorisation names the kinds of signature it allows (perform, inspect, certify), its
scope (ATA sections such as 74-10, a whole chapter such as 74, or kinds of procedure such
as "removal"), the licence or certificate it rests on, and the last day it is valid. Pure:
plain values in, an Authorisation, a RuleRefusal or an InputProblem out.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from datetime import date

from .errors import RuleRefusal
from .readings import InputProblem

SIGNATURE_KINDS = ("perform", "inspect", "certify")
# The signature kind each sign step's role needs.
SIGNATURE_FOR_ROLE = {"performer": "perform", "inspector": "inspect", "certifying": "certify"}
_DOING = {"perform": "performing", "inspect": "inspecting", "certify": "certifying"}
PROCEDURE_KINDS = ("removal", "installation", "inspection", "functional check")
# ATA chapter ("74") or chapter-section ("74-10"): ATA iSpec 2200 numbering.
_ATA = re.compile(r"\d\d(-\d\d)?")
LICENCE_TEXT_MAX = 80  # printed in a stamp box line; common practice, no source


@dataclass(frozen=True)
class Authorisation:
    """One grant of signing rights to one person (never deleted: revoking dates it)."""

    id: int
    person_id: int
    signatures: tuple[str, ...]
    scope: tuple[str, ...]
    licence_kind: str
    licence_number: str
    expires_on: date
    granted_by: int | None = None
    granted_at: str | None = None
    revoked_at: str | None = None

    def allows(self, signature: str) -> bool:
        return signature in self.signatures

    def covers(self, procedure_ata: str, procedure_kind: str) -> bool:
        """An ATA section matches itself and its chapter; a procedure kind matches itself."""
        chapter = procedure_ata.split("-")[0]
        return any(item in (procedure_ata, chapter, procedure_kind) for item in self.scope)

    def expired(self, today: date) -> bool:
        """Valid through its last day (expires_on); expired from the day after."""
        return today > self.expires_on

    @property
    def scope_text(self) -> str:
        return ", ".join(self.scope)


def _work(procedure_ata: str, procedure_kind: str) -> str:
    return f"ATA {procedure_ata} ({procedure_kind})"


def authorisation_for(held: Iterable[Authorisation], role: str, procedure_ata: str,
                      procedure_kind: str, today: date) -> Authorisation:
    """The authorisation a signature of `role` on this procedure rests on, valid `today`.

    Raises RuleRefusal (`authorisation_missing`, `authorisation_expired` or
    `authorisation_revoked`) with what the person can do about it. When several cover the
    signature, the one valid longest is used (then the newest grant).
    """
    signature = SIGNATURE_FOR_ROLE[role]
    fitting = [a for a in held
               if a.allows(signature) and a.covers(procedure_ata, procedure_kind)]
    valid = [a for a in fitting if a.revoked_at is None and not a.expired(today)]
    if valid:
        return max(valid, key=lambda a: (a.expires_on, a.id))
    wanted = f"{_DOING[signature]} {_work(procedure_ata, procedure_kind)}"
    lapsed = [a for a in fitting if a.revoked_at is None]
    if lapsed:
        last = max(lapsed, key=lambda a: a.expires_on)
        raise RuleRefusal("authorisation_expired", f"No authorisation of yours covers {wanted} "
                          f"(expired {last.expires_on.isoformat()}): ask for it to be renewed "
                          "before you sign.", expired_on=last.expires_on.isoformat())
    if fitting:
        revoked = max(str(a.revoked_at) for a in fitting)
        raise RuleRefusal("authorisation_revoked", f"No authorisation of yours covers {wanted} "
                          f"(revoked {revoked[:10]}): another person with that authorisation "
                          "signs here.")
    raise RuleRefusal("authorisation_missing", f"No authorisation of yours covers {wanted}: "
                      "another person holding one signs here, or ask the station's admin.")


@dataclass(frozen=True)
class GrantTerms:
    """An authorisation to grant, its fields checked."""

    signatures: tuple[str, ...]
    scope: tuple[str, ...]
    licence_kind: str
    licence_number: str
    expires_on: date


def _listed(value: str | Sequence[str]) -> list[str]:
    items = value.split(",") if isinstance(value, str) else list(value)
    return [" ".join(str(i).split()) for i in items if str(i).strip()]


def check_grant(*, signatures: str | Sequence[str], scope: str | Sequence[str],
                licence_kind: str, licence_number: str, expires_on: str | date,
                today: date) -> GrantTerms:
    """The terms of a new authorisation, or InputProblem naming the field that is wrong.

    `signatures` and `scope` may be lists or comma-separated text; `expires_on` an ISO date.
    """
    kinds = [s.lower() for s in _listed(signatures)]
    if not kinds:
        raise InputProblem("signatures", "Choose at least one kind of signature: "
                           + ", ".join(SIGNATURE_KINDS) + ".")
    unknown = [s for s in kinds if s not in SIGNATURE_KINDS]
    if unknown:
        raise InputProblem("signatures", f"'{unknown[0]}' is not a kind of signature; they are "
                           + ", ".join(SIGNATURE_KINDS) + ".")
    covered = [s.lower() for s in _listed(scope)]
    if not covered:
        raise InputProblem("scope", "Give the scope: an ATA chapter (74), a section (74-10) or "
                           "a kind of procedure (" + ", ".join(PROCEDURE_KINDS) + ").")
    wrong = [s for s in covered if not _ATA.fullmatch(s) and s not in PROCEDURE_KINDS]
    if wrong:
        raise InputProblem("scope", f"'{wrong[0]}' is neither an ATA chapter (74) or section "
                           "(74-10) nor a kind of procedure (" + ", ".join(PROCEDURE_KINDS)
                           + ").")
    texts = {}
    for name, value, what in (("licence_kind", licence_kind, "the kind of licence or "
                               "authorisation"), ("licence_number", licence_number,
                                                  "the licence or authorisation number")):
        text = " ".join(str(value or "").split())
        if not text:
            raise InputProblem(name, f"Give {what}; it is printed with every signature.")
        if len(text) > LICENCE_TEXT_MAX:
            raise InputProblem(name, f"Keep {what} to {LICENCE_TEXT_MAX} characters.")
        texts[name] = text
    if isinstance(expires_on, date):
        last_day = expires_on
    else:
        try:
            last_day = date.fromisoformat(str(expires_on).strip())
        except ValueError:
            raise InputProblem("expires_on", "Give the last day it is valid as a date "
                               "(YYYY-MM-DD).") from None
    if last_day < today:
        raise InputProblem("expires_on", f"{last_day.isoformat()} is already past: an "
                           "authorisation is granted until a day still to come.")
    return GrantTerms(tuple(dict.fromkeys(kinds)), tuple(dict.fromkeys(covered)),
                      texts["licence_kind"], texts["licence_number"], last_day)
