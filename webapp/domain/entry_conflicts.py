"""Refusals of an entry that someone had recorded first (a step done, a breaker tagged), worded
for the tablet that sent it late: which step, which entry (tag and breaker), who recorded
what and when, and what to do at the aircraft; and the words that tell the person who
recorded it first. Pure: names and times come in as plain values.

The rules themselves stay where they are (`checks`, `gates`); this module only words them.
Lockout wording defers to the shop's lockout/tagout procedure: common practice, no source,
is that only the person who hung a tag takes it off, and that a tag on a breaker that no
record names is taken off by its owner rather than left hanging unexplained.
"""

from __future__ import annotations

from collections.abc import Mapping
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

from .errors import RuleRefusal

if TYPE_CHECKING:  # (gates and checks call this module: types only, no import circle)
    from .execution import StepProgress
    from .gates import Tag


def station_time(iso: str | None) -> str:
    """A stored time as the station shows it (date, hours and minutes, UTC)."""
    if not iso:
        return "an unknown time"
    try:
        moment = datetime.fromisoformat(iso)
    except ValueError:
        return iso
    if moment.tzinfo is not None:
        moment = moment.astimezone(UTC)
    return moment.strftime("%Y-%m-%d %H:%M UTC")


def entry_words(kind: str, data: Mapping[str, Any]) -> str:
    """What an entry was, in the mechanic's words ("tag T-7 on IGN-A", "reading")."""
    tag = str(data.get("tag") or "").strip()
    breaker = str(data.get("breaker") or "").strip()
    if kind == "breaker_tagged" and tag:
        found = " found" if data.get("confirmed_existing") else ""
        return f"tag {tag}{found} on {breaker}" if breaker else f"tag {tag}"
    if kind == "tag_removed" and tag:
        return f"tag {tag} taken off"
    return {"acknowledged": "acknowledgement", "reading_recorded": "reading",
            "part_recorded": "part entry", "sparks_counted": "spark count"}.get(kind, "entry")


def _step_words(target: StepProgress) -> str:
    text = target.step.text.strip().splitlines()[0] if target.step.text.strip() else ""
    text = text if len(text) <= 60 else text[:57] + "..."
    return f"step {target.number}" + (f" ('{text}')" if text else "")


def _who(person_id: int | None, me: int, names: Mapping[int, str]) -> str:
    if person_id == me:
        return "you"
    return names.get(person_id, "another person") if person_id is not None else "someone"


def first_recorder_notice(refused_name: str, step: str, entry: str, extra: str = "") -> str:
    """What the person who recorded first is told on their job page."""
    what = f" ({entry})" if entry.startswith("tag ") else ""
    return (f"An entry from {refused_name}'s tablet for {step}{what} was refused "
            f"because you had recorded it first.{extra} Check with {refused_name}.")


def _refusal(rule: str, reason: str, first_by: int | None, me: int, names: Mapping[int, str],
             step: str, entry: str, extra: str = "", **details: object) -> RuleRefusal:
    """The refusal, with whom to tell when the first entry was someone else's."""
    if first_by is not None and first_by != me:
        details["first_person_id"] = first_by
        details["notice"] = first_recorder_notice(names.get(me, "another mechanic"), step,
                                                  entry, extra)
    return RuleRefusal(rule, reason, **details)


def step_already_done(target: StepProgress, kind: str, data: Mapping[str, Any], me: int,
                      names: Mapping[int, str]) -> RuleRefusal:
    """An entry for a step someone already completed (another tablet, or a late resend)."""
    first = target.event or {}
    by = first.get("person_id")
    who = _who(by, me, names)
    at = station_time(first.get("received_at"))
    step = _step_words(target)
    entry = entry_words(kind, data)
    said = f"Step {target.number} was already done by {who} at {at}"
    if kind == "breaker_tagged" and not data.get("confirmed_existing") and data.get("tag"):
        tag, breaker = str(data["tag"]).strip(), str(data.get("breaker", "")).strip()
        reason = (f"Your tag {tag} on {breaker} is not recorded: {said}, so this job takes no "
                  f"more tags. Take your tag {tag} off {breaker}; the breaker stays locked out "
                  f"under the tags the job recorded, which only their owners take off. Check "
                  f"with {who} before you work on the circuit, and follow your shop's "
                  "lockout/tagout procedure.")
        extra = f" Their tag {tag} may still hang on {breaker} beside the job's own."
    else:
        reason = (f"Your {entry} for {step} is not recorded: {said}. Nothing more is needed "
                  f"for this step; if what you did differs from what is recorded, tell {who} "
                  "and your supervisor before you go on.")
        extra = ""
    return _refusal("already_done", reason, by, me, names, step, entry, extra,
                    first_event=first.get("id"))


def breaker_already_tagged(number: str, breaker: str, existing: Tag, me: int,
                           names: Mapping[int, str]) -> RuleRefusal:
    """A second tag on a breaker this job already holds a tag on."""
    who = _who(existing.applied_by, me, names)
    at = station_time(existing.applied_at)
    step = f"the lockout of {breaker}"
    reason = (f"Your tag {number} on {breaker} is not recorded: {who} recorded tag "
              f"{existing.number} on {breaker} for this job at {at} first, and a job holds one "
              f"tag on a breaker. Take your tag {number} off {breaker}; the breaker stays "
              f"locked out under tag {existing.number}, which only its owner takes off. Check "
              f"with {who} before you work on the circuit, and follow your shop's "
              "lockout/tagout procedure.")
    extra = f" Their tag {number} may still hang on {breaker} beside your tag {existing.number}."
    return _refusal("already_tagged", reason, existing.applied_by, me, names, step,
                    f"tag {number} on {breaker}", extra)


def tag_already_recorded(number: str, breaker: str, existing: Tag, job_id: int, me: int,
                         names: Mapping[int, str]) -> RuleRefusal:
    """A tag number the station already has hanging: the same tag entered twice, or a
    number misread."""
    if existing.breaker != breaker:
        return RuleRefusal("tag_in_use", f"Tag {number} already hangs on breaker "
                           f"{existing.breaker}; each tag has its own number. Check the number "
                           f"on the tag you hung on {breaker}.")
    who = _who(existing.owner_id, me, names)
    at = station_time(existing.applied_at)
    where = "for this job" if existing.job_id == job_id else f"for job {existing.job_id}"
    if existing.owner_id == me:
        reason = (f"Tag {number} on {breaker} is already recorded {where}, as yours, at {at}: "
                  "this entry is not needed and nothing more is to be done.")
    else:
        reason = (f"Your entry of tag {number} on {breaker} is not recorded: {who} recorded "
                  f"tag {number} on {breaker} {where} at {at}, so the station has {who} as its "
                  f"owner. If you hung tag {number}, tell {who} and your supervisor now: only "
                  "the owner on record takes it off.")
    return _refusal("tag_in_use", reason, existing.owner_id, me, names,
                    f"the lockout of {breaker}", f"tag {number} on {breaker}")
