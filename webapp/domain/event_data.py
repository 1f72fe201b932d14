"""The shape of each client event kind's `data`: allowed keys, types and sizes (pure).

Shape only: every key optional here, so the domain's own checks still say what is missing
and why (`checks`, `readings`, `gates`, ...). A key not listed, a list where a word belongs,
NaN or a 20 MB text is refused here, before anything is stored: the event log is append-only,
so junk accepted once could never be removed. A new event kind needs its model here.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping
from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field, StrictBool, ValidationError

from .readings import InputProblem

# Sizes: generous beside the domain's own limits (a tag number 24, a reason 500, a deferral
# limit 60, an amendment 300 characters), so the domain still answers with its own words.
SHORT = 200      # names, numbers as typed, units, tags, references, PINs
LONG = 2000      # free text: findings, reasons, how an item was put right
MAX_TAPS = 2000  # a spark count by taps: a minute at a few hundred snaps a minute
MAX_ITEMS = 200  # a check step's confirmed items
MAX_INT = 2**53  # what a tablet's JavaScript holds exactly (ECMA-262: Number.MAX_SAFE_INTEGER)

Short = Annotated[str, Field(max_length=SHORT)]
Long = Annotated[str, Field(max_length=LONG)]
Integer = Annotated[int, Field(strict=True, ge=-MAX_INT, le=MAX_INT)]
Real = Annotated[float, Field(strict=True, allow_inf_nan=False, ge=-1e15, le=1e15)]
# A number as a form types it (text) or as JSON carries it; the domain reads and converts it.
Number = Integer | Real | Short


class _Data(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True)


class Empty(_Data):
    """Kinds that carry nothing: an acknowledgement, energising, a count's start."""


class StepDone(_Data):
    items: Annotated[list[Integer], Field(max_length=MAX_ITEMS)] | None = None


class BreakerTagged(_Data):
    breaker: Short | None = None
    tag: Short | None = None


class TagTakenOver(_Data):
    tag: Short | None = None
    breaker_confirmed_open: StrictBool | None = None


class TagRemoved(_Data):
    tag: Short | None = None
    # Refused by its own rule (absent_owner_typed), whatever was typed: a name or a note.
    absent_owner: Short | Annotated[dict[str, Short], Field(max_length=8)] | None = None


class TagHandedOver(_Data):
    tag: Short | None = None
    to: Integer | Short | None = None
    pin: Short | None = None


class TagTransferAuthorised(TagHandedOver):
    reason: Long | None = None


class TagRemovalAuthorised(_Data):
    tag: Short | None = None
    reason: Long | None = None
    pin: Short | None = None


class DeEnergised(_Data):
    channel: Short | None = None


class Condition(_Data):
    value: Number | None = None
    unit: Short | None = None


class Adapter(_Data):
    wrench_length: Number | None = None
    extension: Number | None = None
    angle: Number | None = None


class Usage(_Data):
    engine_hours: Number | None = None
    starts: Number | None = None
    continuous_ignition_hours: Number | None = None
    continuous_ignition_estimated: StrictBool | None = None


class ReadingRecorded(_Data):
    text: Long | None = None
    result: Short | None = None
    value: Number | None = None
    unit: Short | None = None
    fastener: Short | None = None
    instrument_id: Short | None = None
    test_voltage: Condition | None = None
    ambient_temperature: Condition | None = None
    humidity: Condition | None = None
    adapter: Adapter | None = None
    usage: Usage | None = None


class Finding(_Data):
    text: Long | None = None
    disposition: Short | None = None
    reference: Short | None = None
    limit: Short | None = None


class Supply(_Data):
    voltage: Number | None = None
    frequency: Number | None = None


class SparksCounted(_Data):
    method: Short | None = None
    taps: Annotated[list[Integer | Real], Field(max_length=MAX_TAPS)] | None = None
    count: Integer | Short | None = None
    window_s: Number | None = None
    supply: Supply | None = None
    mode: Short | None = None
    instrument_id: Short | None = None


class PartRecorded(_Data):
    part_number: Short | None = None
    serial: Short | None = None
    status: Short | None = None
    reason: Short | None = None
    tag: Short | None = None
    release: Short | None = None
    condition: Short | None = None
    usage: Usage | None = None


class Signed(_Data):
    pin: Short | None = None


class Returned(_Data):
    reason: Long | None = None
    repeat_from: Short | None = None


class Amendment(_Data):
    field: Short | None = None
    new: Long | None = None
    why: Long | None = None
    pin: Short | None = None


class ItemClosed(_Data):
    item: Short | Integer | None = None
    how: Long | None = None


EVENT_DATA: dict[str, type[_Data]] = {
    "acknowledged": Empty, "step_done": StepDone, "breaker_tagged": BreakerTagged,
    "tag_taken_over": TagTakenOver, "tag_removed": TagRemoved,
    "tag_handed_over": TagHandedOver, "tag_transfer_authorised": TagTransferAuthorised,
    "tag_removal_authorised": TagRemovalAuthorised, "input_reconnected": Empty,
    "energised": Empty, "de_energised": DeEnergised, "reading_recorded": ReadingRecorded,
    "finding": Finding, "count_started": Empty, "sparks_counted": SparksCounted,
    "part_recorded": PartRecorded, "signed": Signed, "returned": Returned,
    "amendment": Amendment, "item_closed": ItemClosed, "lead_grounded": Empty,
}


def _said(error: Mapping[str, Any]) -> str:
    if error["type"] == "extra_forbidden":
        return "This entry does not carry that field; nothing was stored."
    if error["type"] in ("finite_number", "float_parsing") or (
            isinstance(error.get("input"), float) and not math.isfinite(error["input"])):
        return "A number must be finite (not NaN or infinity)."
    return str(error["msg"]) + "."


def check_event_data(kind: str, data: Any) -> InputProblem | None:
    """None when `data` has the shape `kind` allows; else the first problem, its field a dotted
    path into `data` ("usage.engine_hours"). An unknown kind is left to the rules."""
    model = EVENT_DATA.get(kind)
    if model is None:
        return None
    if not isinstance(data, Mapping):
        return InputProblem("data", "The entry's data must be an object of named fields.")
    try:
        model.model_validate(data)
    except ValidationError as err:
        first = err.errors()[0]
        path = ".".join(str(p) for p in first["loc"] if not _is_union_tag(p)) or "data"
        return InputProblem(path, _said(first))
    return None


def _is_union_tag(part: Any) -> bool:
    """pydantic names the union member it tried in an error's location ("str", "int",
    "constrained-str", "list[...]"); the field path a person reads leaves those out."""
    return isinstance(part, str) and (part in ("str", "int", "float", "bool", "none")
                                      or "[" in part or part.startswith(("constrained-",
                                                                         "function-")))


# How the station keeps what a device sent (for recognising the same entry sent again).


def _comparable(value: Any) -> Any:
    """A sent or stored value as both would read it: text trimmed, numbers (typed or not) as
    floats, nothing and empty text alike."""
    if isinstance(value, bool):
        return value
    if isinstance(value, (int, float)):
        return float(value)
    if isinstance(value, str):
        text = value.strip()
        try:
            number = float(text.replace(",", "."))
        except ValueError:
            return text or None
        return number if math.isfinite(number) else text
    if isinstance(value, Mapping):
        return {k: _comparable(v) for k, v in value.items() if _comparable(v) is not None}
    if isinstance(value, (list, tuple)):
        return [_comparable(v) for v in value]
    return value


# Fields the station keeps under another name: sent key -> path in the stored data.
_KEPT_AS = {"instrument_id": ("instrument", "id")}
_NOT_KEPT = {"pin"}  # used, never stored


def request_digest(job_id: int, kind: str, step_id: str | None, sent: Mapping[str, Any],
                   device_time: str | None) -> str:
    """SHA-256 of what a device sent for an event, in canonical JSON (sorted keys, no spaces),
    the PIN left out: a resend byte for byte (an outbox's replay) gives the same digest; any
    other change of job, kind, step, data or device time gives another."""
    said = {key: value for key, value in sent.items() if key not in _NOT_KEPT}
    canonical = json.dumps([job_id, kind, step_id, said, device_time], sort_keys=True,
                           separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    return hashlib.sha256(canonical.encode("utf-8")).hexdigest()


def same_entry(kind: str, sent: Mapping[str, Any], stored: Mapping[str, Any]) -> bool:
    """Whether `sent` is the data an event already stored for `kind` was made from: every
    field both say something about agrees (the PIN aside, never stored). A sent field the
    station did not keep (a deferral's reference on a repair) cannot be compared and is let
    be; a kept field the device no longer sends is a different entry."""
    model = EVENT_DATA.get(kind)
    fields = set(model.model_fields) if model is not None else set()
    for key in (set(sent) | fields) - _NOT_KEPT:
        said = _comparable(sent.get(key))
        kept = _comparable(_kept(stored, _KEPT_AS.get(key, (key,))))
        if kept is None:
            continue
        if said is None or not _matches(said, kept):
            return False
    return True


def _kept(stored: Mapping[str, Any], path: tuple[str, ...]) -> Any:
    found: Any = stored
    for part in path:
        found = found.get(part) if isinstance(found, Mapping) else None
    return found


def _matches(said: Any, kept: Any) -> bool:
    """A sent value agrees with the kept one when equal, or, for a group of fields, when each
    sent part agrees (the station keeps a supply's limits and a usage's flag beside them)."""
    if isinstance(said, dict):
        return isinstance(kept, dict) and all(
            kept.get(k) is None or _matches(v, kept.get(k)) for k, v in said.items())
    return bool(said == kept)
