"""The work record's signatures and release to service (section 9), and who took part."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from ..domain.execution import JobState
from ..domain.procedures import Sign
from .record_entries import People, Who, station_time

# What each sign step's signature means (21 CFR 11.50(a)(3): the meaning is printed with it).
SIGN_MEANINGS = {"performer": "performed the work",
                 "inspector": "inspected the work (independent inspection)",
                 "certifying": "certified the work for release to service"}
_MEANING_WORDS = {"perform": "performer", "inspect": "inspector", "certif": "certifying",
                  "releas": "certifying"}


# The kind of certificate a signer's authorisation number is (14 CFR 43.9(a)(4)). A
# signature stores the licence kind of the authorisation it rests on; this is printed only
# for one that has none stored (an amendment, a record signed before authorisations).
AUTHORISATION_KIND = "organisation authorisation"


@dataclass(frozen=True)
class Signature:
    name: str
    authorisation: str
    kind: str
    meaning: str
    signed_at: str
    where: str = ""   # "Signed in revision 1 (record SW-…)" when not signed in this file


@dataclass(frozen=True)
class SignBlock:
    step_number: int | None
    role: str
    meaning: str
    text: str
    signature: Signature | None   # a signature made before this print, shown as text
    field_name: str | None = None  # the PDF signature field whose stamp box this block has


@dataclass(frozen=True)
class PersonLine:
    who: Who
    entries: int
    steps: int
    opened_job: bool


def performers(events: Sequence[Mapping[str, Any]], row: Mapping[str, Any], state: JobState,
               who: People) -> list[PersonLine]:
    entries: dict[int, int] = {}
    for e in events:
        entries[e["person_id"]] = entries.get(e["person_id"], 0) + 1
    steps: dict[int, int] = {}
    for e in state.completed.values():
        steps[e["person_id"]] = steps.get(e["person_id"], 0) + 1
    found = []
    for person_id, count in entries.items():
        person = who(person_id)
        assert person is not None
        found.append(PersonLine(person, count, steps.get(person_id, 0),
                                person_id == row["opened_by"]))
    return found


def _signature(raw: Mapping[str, Any]) -> Signature:
    return Signature(name=str(raw.get("name") or "—"),
                     authorisation=str(raw.get("authorisation") or "—"),
                     kind=str(raw.get("kind") or AUTHORISATION_KIND),
                     meaning=str(raw.get("meaning") or "—"),
                     signed_at=station_time(raw.get("signed_at")),
                     where=str(raw.get("where") or ""))


def _role_of(raw: Mapping[str, Any]) -> str | None:
    if raw.get("role") in SIGN_MEANINGS:
        return str(raw["role"])
    meaning = str(raw.get("meaning", "")).lower()
    return next((role for word, role in _MEANING_WORDS.items() if word in meaning), None)


def sign_blocks_and_release(state: JobState, signatures: Sequence[Mapping[str, Any]]
                            ) -> tuple[list[SignBlock], SignBlock | None]:
    """One block per sign step (filled when a signature is given for it), then any other
    signature; and the release-to-service block (a certifying signature fills it)."""
    unused = list(signatures)
    blocks = []
    for progress in state.steps:
        step = progress.step
        if not isinstance(step, Sign):
            continue
        match = next((s for s in unused if s.get("step") == step.id), None) or next(
            (s for s in unused if s.get("step") is None and _role_of(s) == step.role), None)
        if match is not None:
            unused.remove(match)
        blocks.append(SignBlock(progress.number, step.role, SIGN_MEANINGS[step.role],
                                step.text.strip(), _signature(match) if match else None,
                                field_name=step.id))
    release_raw = next((s for s in unused if _role_of(s) == "certifying"), None)
    if release_raw is not None:
        unused.remove(release_raw)
    blocks += [SignBlock(None, _role_of(s) or "other", str(s.get("meaning") or "—"), "",
                         _signature(s)) for s in unused]
    certified = next((b for b in blocks if b.role == "certifying" and b.signature), None)
    release = (SignBlock(None, "certifying", SIGN_MEANINGS["certifying"], "",
                         _signature(release_raw)) if release_raw is not None else certified)
    if release is None:
        # The certifying signature is still to come: the release names the box it goes in.
        release = next((b for b in blocks if b.role == "certifying"), None)
    return blocks, release
