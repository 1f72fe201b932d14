"""The work record's content: everything the PDF prints, gathered from the store and the domain.

Nothing here decides a rule: step statuses, readings, verdicts, the power-off and
the duty-cycle clocks come from the job's state (webapp.domain.execution), the
waits from webapp.domain.gates. This module only looks them up and words them,
so the review page and the PDF print the same facts the same way.

Each section's lines are worded in its own module (record_steps, record_gates,
record_parts, record_signatures); this one gathers them into the WorkRecord.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from ..domain import gates
from ..domain.chain import first_broken_link
from ..domain.execution import JobState
from ..domain.procedures import Sign
from ..store import Database, fleet, signers
from ..store import jobs as job_store
from ..store import procedures as procedure_store
from ..store.job_states import Job, load_job
from .record_entries import AmendmentLine, Entry, People, Who, station_time, step_of
from .record_gates import (
    DischargeLine,
    Handover,
    TagLine,
    discharge_lines,
    ignition_entries,
    power_entries,
    tags_and_handovers,
)
from .record_parts import (
    COMPONENT_WORDS,
    PartLine,
    WearChart,
    recorded_parts,
    tool_entries,
    wear_charts,
)
from .record_release import ReleaseLines, release_lines
from .record_signatures import PersonLine, SignBlock, performers, sign_blocks_and_release
from .record_steps import (
    DISPOSITION_WORDS,
    ReadingLine,
    StepLine,
    dated,
    reading_line,
    step_line,
    tags_by_step,
)
from .verify import record_id_of

NONE = "none"


@dataclass(frozen=True)
class WorkRecord:
    record_id: str
    printed_at: str
    operator_name: str
    operator_approval: str
    job_id: int
    opened_at: str
    opened_by: Who | None
    registration: str
    aircraft_model: str
    engine_model: str
    engine_serial: str
    position: int
    channel: str
    procedure_id: str
    procedure_title: str
    procedure_kind: str
    ata: str
    revision_number: int
    revision_status: str
    revision_sha256: str
    source_document: str
    source_section: str
    source_revision: str
    completed: bool
    completion: str
    steps: list[StepLine]
    readings: list[ReadingLine]
    tags: list[TagLine]
    handovers: list[Handover]
    power: list[Entry]
    discharges: list[DischargeLine]
    ignition: list[Entry]
    channel_runs: list[str]
    tools: list[Entry]
    parts: list[PartLine]
    recorded_parts: list[Entry]
    wear_charts: list[WearChart]
    performers: list[PersonLine]
    sign_blocks: list[SignBlock]
    release: SignBlock | None
    limitations: list[str]
    release_lines: ReleaseLines | None
    after_completion: list[str]
    chain_sha256: str
    chain_events: int
    chain_status: str
    refusals: list[Entry] = field(default_factory=list)
    record_revision: int = 1   # 1, then one more after each return and each amendment
    returns: list[Entry] = field(default_factory=list)      # sent back by a supervisor
    items_closed: list[Entry] = field(default_factory=list)  # engine open items put right
    amendments: list[AmendmentLine] = field(default_factory=list)  # after certification
    amends: str = ""          # which revision and record this revision amends
    record_date: str = ""   # the job's opening date (UTC): rows of another date print theirs

    @property
    def findings(self) -> list[ReadingLine]:
        return [r for r in self.readings if r.finding]


# --- gathering -------------------------------------------------------------------------

def _consistent_read(db: Database, job_id: int) -> tuple[Job, list[dict[str, Any]]]:
    """The job's state and its events as of one chain head (an entry arriving between the
    two reads would make the record print a log its state and hash do not cover)."""
    for _ in range(5):
        job = load_job(db, job_id)
        events = job_store.events(db, job_id)
        if events and events[-1]["hash"] == job.head["hash"]:
            return job, events
    raise RuntimeError(f"job {job_id}'s log kept changing while its record was read")


def record_id_for(job_id: int, head: Mapping[str, Any]) -> str:
    """The record's identity: the job and the event-chain head it was printed from.

    A record printed after one more entry has another id, so two prints that differ
    can never carry the same one.
    """
    return f"SW-{job_id:05d}-{int(head['seq']):03d}-{str(head['hash'])[:8].upper()}"


def gather(db: Database, job_id: int, now: datetime,
           signatures: Sequence[Mapping[str, Any]] | None = None,
           record_id: str | None = None, record_revision: int = 1) -> WorkRecord:
    """Everything the work record of a job prints, as of `now`."""
    job, events = _consistent_read(db, job_id)
    row, state = job.row, job.state
    who = People(db)
    numbers = {p.id: p.number for p in state.steps}
    engine = fleet.engine(db, row["engine_id"]) or {}
    settings = fleet.settings(db)
    revision = procedure_store.revision(db, row["revision_hash"]) or {}
    procedure = state.procedure
    source = procedure.source
    broken = first_broken_link(events)
    sign_blocks, release = sign_blocks_and_release(
        state, _placed(db, job_id, signatures or [], record_revision))
    readings = [reading_line(r, state, numbers, who) for r in state.readings]
    tags, handovers = tags_and_handovers(db, row, state, who)
    tagged = tags_by_step(events)
    return WorkRecord(
        record_id=record_id or record_id_for(job_id, job.head),
        record_revision=record_revision,
        printed_at=station_time(now),
        operator_name=settings.get("operator_name") or "(operator not set on this station)",
        operator_approval=settings.get("operator_approval") or "(approval reference not set)",
        job_id=job_id, opened_at=station_time(row["opened_at"]),
        opened_by=who(row["opened_by"]),
        registration=row["registration"], aircraft_model=engine.get("aircraft_model") or "—",
        engine_model=row["engine_model"], engine_serial=row["engine_serial"],
        position=row["position"], channel=row["channel"] or "A and B",
        procedure_id=row["procedure_id"], procedure_title=procedure.title,
        procedure_kind=procedure.kind, ata=procedure.ata,
        revision_number=row["revision_number"], revision_status=revision.get("status", "—"),
        revision_sha256=row["revision_hash"],
        source_document=source.document, source_section=source.section,
        source_revision=source.revision,
        completed=state.status == "complete", completion=_completion(state),
        steps=dated([step_line(p, tagged.get(p.id, ""), who) for p in state.steps],
                    station_time(row["opened_at"])[:10]),
        record_date=station_time(row["opened_at"])[:10],
        readings=readings,
        tags=tags, handovers=handovers,
        power=power_entries(state, events, numbers, who),
        discharges=discharge_lines(state, numbers, who),
        ignition=ignition_entries(state, events, numbers, who),
        channel_runs=[f"Channel {c}: {clock.runs} run{'' if clock.runs == 1 else 's'}"
                      + (", still energised when printed" if clock.is_on else "")
                      + "; time past an on-limit: "
                      + (gates.mmss(clock.overrun_s) if clock.overrun_s > 0 else NONE)
                      for c, clock in sorted(state.clocks.items())],
        tools=tool_entries(state, numbers, who),
        parts=[PartLine(COMPONENT_WORDS.get(c.get("kind", ""), str(c.get("kind"))),
                        str(c.get("channel") or "—"), str(c.get("part_number")),
                        str(c.get("serial")), str(c.get("type")))
               for c in state.configuration.components],
        recorded_parts=recorded_parts(state, numbers, who),
        wear_charts=wear_charts(db, row, state),
        performers=performers(events, row, state, who),
        sign_blocks=sign_blocks, release=release,
        release_lines=release_lines(db, row["engine_id"], job_id, state),
        limitations=[f"Deferred at step {r.step_number}: {r.finding} (reference {r.reference})"
                     for r in readings if r.disposition.startswith(DISPOSITION_WORDS["deferred"])],
        after_completion=([] if procedure.after_completion == NONE
                          else list(procedure.after_completion)),
        chain_sha256=job.head["hash"], chain_events=len(events),
        chain_status=("intact: every entry's SHA-256 and link to the one before check out"
                      if broken is None else f"BROKEN at entry {broken}: the log was altered"),
        refusals=[Entry(f"{r['kind']} at {r['step_id'] or 'no step'}", who(r["person_id"]),
                        station_time(r["received_at"]), numbers.get(r["step_id"]),
                        f"{r['rule']}: {r['reason']}")
                  for r in job_store.refusals(db, job_id)],
        items_closed=[Entry(f"open item {e['data']['reference']}: {e['data']['text']}",
                            who(e["person_id"]), station_time(e["received_at"]), None,
                            e["data"]["how"])
                      for e in events if e["kind"] == "item_closed"],
        returns=[Entry(r["data"]["reason"], who(r["person_id"]), station_time(r["received_at"]),
                       numbers.get(r["data"].get("repeat_from") or ""),
                       "work done again from this step on" if r["data"].get("repeat_from")
                       else "signatures only")
                 for r in state.returns],
        amendments=[_amendment(a, state, numbers, who) for a in state.amendments],
        amends=_amends(db, job_id, record_revision) if state.amendments else "",
    )


def _amendment(a: Mapping[str, Any], state: JobState, numbers: Mapping[str, int],
               who: People) -> AmendmentLine:
    d = a["data"]
    step = step_of(state, a["step_id"] or "")
    words = " ".join(step.text.split()) if step is not None else "—"
    return AmendmentLine(numbers.get(a["step_id"] or ""), words[:90] + ("…" if len(words) > 90
                                                                        else ""),
                         str(d.get("field") or "—"),
                         str(d["old"]) if "old" in d else str(d.get("what", "—")),
                         str(d.get("new", "—")), d["why"], who(a["person_id"]),
                         station_time(a["received_at"]))


def _placed(db: Database, job_id: int, signatures: Sequence[Mapping[str, Any]],
            revision: int) -> list[Mapping[str, Any]]:
    """Signatures given in an earlier revision say so, with that revision's record id: they
    are not signatures of this file."""
    if not any(int(s.get("revision") or revision) < revision for s in signatures):
        return list(signatures)
    ids: dict[int, str] = {}
    for state in signers.stored_states(db, job_id):
        ids.setdefault(int(state["revision"]), record_id_of(bytes(state["pdf"])) or "id unknown")
    return [{**s, "where": f"Signed in revision {s['revision']} (record "
                           f"{ids.get(int(s['revision']), 'id unknown')})"}
            if int(s.get("revision") or revision) < revision else s for s in signatures]


def _amends(db: Database, job_id: int, revision: int) -> str:
    """Which revision and record this one amends (the one it supersedes, as kept)."""
    earlier = [s for s in signers.stored_states(db, job_id) if int(s["revision"]) < revision]
    if not earlier:
        return ""
    last = earlier[-1]
    return (f"This revision ({revision}) amends revision {last['revision']}, record "
            f"{record_id_of(bytes(last['pdf'])) or '(id unknown)'}, kept unchanged at the "
            "station.")


def _completion(state: JobState) -> str:
    """When the work was completed (14 CFR 43.9(a)(2)): the last work step, signatures apart."""
    work = [p for p in state.steps if not isinstance(p.step, Sign)]
    if work and all(p.status == "done" for p in work):
        last = max(state.completed[p.id]["received_at"] for p in work)
        signed = all(p.status == "done" for p in state.steps)
        return (f"Work completed {station_time(last)}"
                + ("" if signed else "; signatures in section 9"))
    upcoming = state.next_step
    waiting = (f"; waiting at step {upcoming.number} ({upcoming.step.kind.replace('_', ' ')})"
               if upcoming is not None else "")
    return (f"Not yet completed: {sum(p.status == 'done' for p in work)} of {len(work)} "
            f"work steps done{waiting}")
