"""Who may move a lockout tag to someone else, or take off a tag they did not hang.

A tag changes owner only with consent: its owner hands it to a named mechanic, or, when
the owner has left, a supervisor authorises the transfer (or, at a release step with the
shop's absent-owner path, the removal) with the reason. The incoming mechanic then
re-checks the breaker and takes the tag over. Consents are events like any other, each
by the person consenting, on their own log-in; the PIN that proves it is checked by the
station and never reaches these rules. A name typed into someone else's entry is never
an authorisation.

Sources:
- 29 CFR 1910.147(e)(3): each device removed by the person who applied it; the exception
  is the employer's documented procedure when that person is not at the facility, after
  reasonable efforts to reach them (verified in a secondary copy).
- 29 CFR 1910.147(f)(4): shift or personnel changes transfer the protection in an orderly
  way between off-going and oncoming employees (verified in a secondary copy); the
  incoming person re-verifies the isolation (common practice, no source).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from .errors import RuleRefusal
from .gates import Tag, tag_number
from .procedures import Lockout

MAX_REASON_LENGTH = 500


def _hanging(data: Mapping[str, Any], tags: Mapping[str, Tag]) -> Tag:
    number = tag_number(data)
    tag = tags.get(number)
    if tag is None:
        raise RuleRefusal("tag_not_active", f"No tag {number} hangs on this engine's breakers.")
    return tag


def _recipient(data: Mapping[str, Any], tag: Tag, roles_of: Mapping[int, tuple[str, ...]]
               ) -> int:
    """The incoming mechanic an event names: an active mechanic of this station."""
    to = data.get("to")
    if isinstance(to, bool) or not isinstance(to, int) or "mechanic" not in roles_of.get(to, ()):
        raise RuleRefusal("unknown_recipient", f"Name the mechanic who takes tag {tag.number} "
                          f"over: '{to}' is not a mechanic enrolled on this station.")
    if to == tag.owner_id:
        raise RuleRefusal("already_owner", f"Tag {tag.number} already belongs to that person.")
    return to


def _reason(data: Mapping[str, Any]) -> str:
    reason = data.get("reason")
    if not isinstance(reason, str) or not reason.strip():
        raise RuleRefusal("reason_missing", "Write the reason: how the owner was sought, and "
                          "why the tag cannot wait for them.")
    if len(reason.strip()) > MAX_REASON_LENGTH:
        raise RuleRefusal("reason_missing", f"A reason is at most {MAX_REASON_LENGTH} "
                          "characters.")
    return reason.strip()


def _supervisor(roles: tuple[str, ...]) -> None:
    if "supervisor" not in roles:
        raise RuleRefusal("supervisor_only", "Only a supervisor authorises a tag's move for an "
                          "absent owner, on the supervisor's own log-in.")


def check_tag_handed_over(data: Mapping[str, Any], tags: Mapping[str, Tag], person_id: int,
                          roles_of: Mapping[int, tuple[str, ...]]) -> dict[str, Any]:
    """The owner consents to hand their tag to a named mechanic (who still takes it over)."""
    tag = _hanging(data, tags)
    if tag.owner_id != person_id:
        raise RuleRefusal("not_owner", f"Only the owner of tag {tag.number} hands it over.")
    return {"tag": tag.number, "to": _recipient(data, tag, roles_of)}


def check_tag_transfer_authorised(data: Mapping[str, Any], tags: Mapping[str, Tag],
                                  person_id: int, roles: tuple[str, ...],
                                  roles_of: Mapping[int, tuple[str, ...]]) -> dict[str, Any]:
    """A supervisor authorises a mechanic to take over the tag of an owner who has left."""
    _supervisor(roles)
    tag = _hanging(data, tags)
    if tag.owner_id == person_id:
        raise RuleRefusal("own_tag", f"Tag {tag.number} is yours: hand it over as its owner.")
    to = _recipient(data, tag, roles_of)
    if any(c.kind == "tag_transfer_authorised" and c.to == to for c in tag.consents):
        raise RuleRefusal("already_authorised", f"Tag {tag.number}'s transfer to that mechanic "
                          "is already authorised.")
    return {"tag": tag.number, "to": to, "reason": _reason(data), "owner": tag.owner_id}


def check_tag_taken_over(data: Mapping[str, Any], tags: Mapping[str, Tag],
                         person_id: int) -> dict[str, Any]:
    """The incoming mechanic takes a tag handed (or authorised) to them, having re-confirmed
    its breaker open. Returns the data to store: who had it, and the consent used."""
    tag = _hanging(data, tags)
    if tag.owner_id == person_id:
        raise RuleRefusal("already_owner", f"Tag {tag.number} is already yours.")
    consent = tag.consent_for(person_id)
    if consent is None:
        raise RuleRefusal("no_consent", f"Tag {tag.number} is not yours to take: its owner "
                          "hands it to you on their own log-in with their PIN, or, if they "
                          "have left, a supervisor authorises the transfer.")
    if data.get("breaker_confirmed_open") is not True:
        raise RuleRefusal("breaker_not_confirmed", f"Check that breaker {tag.breaker} is open "
                          "and collared yourself before you take over its tag.")
    return {"tag": tag.number, "breaker_confirmed_open": True, "from": tag.owner_id,
            "consent": consent.event_id}


def _on_release_step(step: Lockout, tag: Tag) -> None:
    if step.action != "release":
        raise RuleRefusal("wrong_event_for_step", "Tags come off only at a release step.")
    if tag.breaker not in {b.id for b in step.breakers}:
        raise RuleRefusal("unknown_breaker", f"Tag {tag.number} is on {tag.breaker}, which this "
                          "step does not release.")


def check_tag_removal_authorised(step: Lockout, data: Mapping[str, Any],
                                 tags: Mapping[str, Tag], person_id: int,
                                 roles: tuple[str, ...], job_id: int) -> dict[str, Any]:
    """A supervisor authorises, at a release step with an absent-owner path, that a tag whose
    owner has left comes off in this job; a mechanic of the job then removes it."""
    _supervisor(roles)
    if step.action == "release" and step.absent_owner is None:
        raise RuleRefusal("absent_owner_not_allowed", "This procedure gives no absent-owner "
                          "path: the tag's owner must come back and remove it.")
    tag = _hanging(data, tags)
    _on_release_step(step, tag)
    if tag.owner_id == person_id:
        raise RuleRefusal("own_tag", f"Tag {tag.number} is yours: remove it yourself.")
    if tag.removal_authorised_in(job_id) is not None:
        raise RuleRefusal("already_authorised", f"Tag {tag.number}'s removal is already "
                          "authorised in this job.")
    return {"tag": tag.number, "reason": _reason(data), "owner": tag.owner_id}


def check_tag_removed(step: Lockout, data: Mapping[str, Any], tags: Mapping[str, Tag],
                      person_id: int, job_id: int) -> dict[str, Any]:
    """A tag removed at a release step: by its owner, or after a supervisor's absent-owner
    authorisation in this job. Returns the data to store (naming that authorisation)."""
    if step.action != "release":
        raise RuleRefusal("wrong_event_for_step", "Tags come off only at a release step.")
    if "absent_owner" in data:
        raise RuleRefusal("absent_owner_typed", "A supervisor's name typed here is not an "
                          "authorisation: the supervisor records the absent-owner removal on "
                          "their own log-in, with their PIN and the reason.")
    tag = _hanging(data, tags)
    _on_release_step(step, tag)
    if tag.owner_id == person_id:
        return {"tag": tag.number}
    authorised = tag.removal_authorised_in(job_id)
    if authorised is None:
        absent = (" If they have left, a supervisor authorises the absent-owner removal."
                  if step.absent_owner else "")
        raise RuleRefusal("tag_owner", f"Only the person who hung tag {tag.number} removes it. "
                          "If they hand it to you, take it over first." + absent)
    return {"tag": tag.number, "absent_owner_authorisation": authorised.event_id}
