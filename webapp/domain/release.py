"""Release to service: what a job's certification says about the engine it worked on.

Every job ends with a certifying signature that either releases the work to service or
says plainly why it does not: a channel not whole (a part off, a connection open, by any
job on the engine), a functional check due after work that disturbed the ignition. Open
items deferred on the engine are the release's limitations, listed by name; "none" only
when there are none. Computed from the engine's state as the certification would leave
it, so the statement on the record and the engine's truth never disagree.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from .engine import CHANNELS, EngineState, apply_engine_event

if TYPE_CHECKING:
    from .execution import JobState

RELEASED = "Released to service"
NOT_RELEASED = "Not released to service"


@dataclass(frozen=True)
class ReleaseStatement:
    released: bool
    work: str                       # the job, procedure and revision it covers
    reasons: tuple[str, ...]        # why not released (empty when released)
    limitations: tuple[str, ...]    # open items the release carries (empty: none)

    @property
    def headline(self) -> str:
        return RELEASED if self.released else NOT_RELEASED

    def as_data(self) -> dict[str, Any]:
        return {"released": self.released, "work": self.work, "reasons": list(self.reasons),
                "limitations": list(self.limitations)}

    @classmethod
    def from_data(cls, data: Mapping[str, Any]) -> ReleaseStatement:
        return cls(bool(data["released"]), str(data["work"]), tuple(data["reasons"]),
                   tuple(data["limitations"]))


def passed_channel_checks(procedure_kind: str,
                          readings: Sequence[Mapping[str, Any]]) -> list[dict[str, Any]]:
    """The effects a functional check's certification has on the engine: each channel whose
    latest spark count in the job was within its limits (a count of both channels counts for
    both) has its due check met, for work done before that count."""
    if procedure_kind != "functional check":
        return []
    latest: dict[str, Mapping[str, Any]] = {}
    for r in readings:
        if r.get("kind") == "spark_count" and r.get("channel") in ("A", "B", "both"):
            latest[str(r["channel"])] = r
    effects = []
    for channel in CHANNELS:
        own = latest.get(channel)
        if own is None or own.get("verdict") not in ("within", "near limit"):
            continue  # a channel not counted alone, or counted out of limits, is not proven
        both = latest.get("both")
        counted = own["received_at"]
        if both is not None and both.get("verdict") in ("within", "near limit"):
            counted = min(counted, both["received_at"])
        elif both is not None:
            continue  # both channels together failed: neither is proven
        effects.append({"effect": "check_passed", "channel": channel, "counted_at": counted})
    return effects


def release_statement(engine: EngineState, work: str, job_id: int,
                      effects: Sequence[Mapping[str, Any]] = ()) -> ReleaseStatement:
    """The statement a certification of this job makes, from the engine as the
    certification (with its `effects`) leaves it."""
    after = apply_engine_event(engine, {"id": "release", "job_id": job_id, "step_id": None,
                                        "received_at": "9999-12-31T00:00:00+00:00",
                                        "data": {"engine": list(effects)}})
    reasons: list[str] = []
    for channel in CHANNELS:
        why = after.not_whole(channel)
        if why:
            reasons.append(f"channel {channel} is not whole: " + "; ".join(why))
    reasons += [d.said() for d in after.checks_due]
    limitations = tuple(f"open item {i.reference} (job {i.job_id}): {i.text}; limit {i.limit}"
                        for i in after.open_items)
    return ReleaseStatement(not reasons, work, tuple(reasons), limitations)


def job_statement(state: JobState, engine: EngineState, job_id: int
                  ) -> tuple[ReleaseStatement, list[dict[str, Any]]]:
    """What certifying this job now states, and the engine effects the certification has:
    the one composition the certification, the supervisor's preview and the printed record
    all use."""
    procedure = state.procedure
    effects = passed_channel_checks(procedure.kind, state.readings)
    work = (f"job {job_id}: {procedure.title}, shop procedure revision "
            f"{state.revision[:12] or 'unknown'} (from {procedure.source.document}, "
            f"{procedure.source.section}, {procedure.source.revision})")
    return release_statement(engine, work, job_id, effects), effects


def given_release(state: JobState) -> ReleaseStatement | None:
    """The statement the job's certifying signature gave, once it is certified."""
    given = [e["data"]["release"] for e in state.completed.values()
             if e.get("kind") == "signed" and "release" in e.get("data", {})]
    return ReleaseStatement.from_data(given[-1]) if given else None
