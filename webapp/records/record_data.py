"""The work record's content: everything the PDF prints, gathered from the store and the domain.

Nothing here decides a rule: step statuses, readings, verdicts, the power-off and
the duty-cycle clocks come from the job's state (webapp.domain.execution), the
waits from webapp.domain.gates. This module only looks them up and words them,
so the review page and the PDF print the same facts the same way.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime
from typing import Any

from .. import recording
from ..charts import wear_chart_svg
from ..domain import gates, wear
from ..domain.chain import first_broken_link
from ..domain.execution import JobState, StepProgress
from ..domain.procedures import (
    Check,
    DischargeWait,
    IgnitionRun,
    Lockout,
    Reading,
    Sign,
    SparkCount,
    Step,
    Torque,
)
from ..domain.readings import VERDICT_SYMBOL
from ..shown import limits_text, unit_label
from ..store import Database, fleet, people
from ..store import jobs as job_store
from ..store import procedures as procedure_store
from ..store import wear as wear_store

NONE = "none"
# What each sign step's signature means (21 CFR 11.50(a)(3): the meaning is printed with it).
SIGN_MEANINGS = {"performer": "performed the work",
                 "inspector": "inspected the work (independent inspection)",
                 "certifying": "certified the work for release to service"}
_MEANING_WORDS = {"perform": "performer", "inspect": "inspector", "certif": "certifying",
                  "releas": "certifying"}
COMPONENT_WORDS = {"exciter": "Ignition exciter", "lead": "High-tension lead",
                   "plug": "Igniter plug"}
DISPOSITION_WORDS = {"replaced": "replaced and re-tested", "re-tested": "re-tested",
                     "deferred": "deferred"}
# Text readings that name a part: their values belong in the parts section as well.
_PART_READING = re.compile(r"serial|part-number|release")
USAGE_LABEL = "FH"  # plug wear is tracked against engine hours, as on the fleet pages


# The kind of certificate a signer's authorisation number is (14 CFR 43.9(a)(4)): the
# station issues signing authority under the organisation's approval.
AUTHORISATION_KIND = "organisation authorisation"


# --- time and people, as the record writes them -----------------------------------------

def station_time(moment: str | datetime | None, seconds: bool = True) -> str:
    """A time as the record prints it: the station's clock in UTC, with the zone written.

    A naive time is taken to be UTC already (the station stores nothing else).
    """
    if moment is None or moment == "":
        return "—"
    when = datetime.fromisoformat(moment) if isinstance(moment, str) else moment
    when = when.replace(tzinfo=UTC) if when.tzinfo is None else when.astimezone(UTC)
    return when.strftime("%Y-%m-%d %H:%M:%S UTC" if seconds else "%Y-%m-%d %H:%M UTC")


@dataclass(frozen=True)
class Who:
    """A person as the record names them: printed name and authorisation number."""

    name: str
    authorisation: str | None

    @property
    def text(self) -> str:
        return f"{self.name} ({self.authorisation or 'no authorisation number'})"


class _People:
    """Looks people up once per record."""

    def __init__(self, db: Database) -> None:
        self._db = db
        self._by_id: dict[int, Who] = {}

    def __call__(self, person_id: int | None) -> Who | None:
        if person_id is None:
            return None
        if person_id not in self._by_id:
            found = people.person_by_id(self._db, person_id)
            self._by_id[person_id] = (Who(found.full_name, found.authorisation) if found
                                      else Who(f"unknown person {person_id}", None))
        return self._by_id[person_id]

    def by_username(self, username: str) -> Who:
        found = people.person_by_username(self._db, username.strip())
        return (Who(found.full_name, found.authorisation) if found
                else Who(f"'{username}' (not enrolled)", None))


# --- the parts of the record -----------------------------------------------------------

@dataclass(frozen=True)
class StepLine:
    number: int
    kind: str
    text: str
    status: str                 # done, next, waiting
    done_by: Who | None
    done_at: str                # the full station time, "2026-12-01 08:02:00 UTC"
    outcome: str = ""           # what the completing entry recorded, in a few words
    new_date: bool = True       # the first step done on its date: the table prints the date

    @property
    def done_on(self) -> str:
        return self.done_at[:10] if self.done_by else ""

    @property
    def done_time(self) -> str:
        return self.done_at[11:] if self.done_by else self.done_at


@dataclass(frozen=True)
class ReadingLine:
    """One reading attempt as recorded, with the finding on it when it was out of limits."""

    step_number: int
    what: str
    attempt: int
    entered: str                # value and unit as the mechanic's tool showed them
    converted: str              # in the procedure's unit (torque: as applied)
    limits: str
    verdict: str
    symbol: str
    conditions: str
    by: Who | None
    at: str
    disposition: str = "—"
    finding: str = ""
    reference: str = "—"
    finding_by: Who | None = None
    finding_at: str = "—"

    @property
    def summary(self) -> str:
        value = f"{self.entered} → {self.converted}" if self.converted else self.entered
        return " ".join(x for x in (value, self.symbol, self.verdict) if x)


@dataclass(frozen=True)
class TagLine:
    tag: str
    breaker: str
    action: str                 # hung, taken over, removed, removed (absent owner)
    by: Who | None
    at: str
    job_id: int
    other_job: bool
    detail: str = ""


@dataclass(frozen=True)
class Handover:
    tag: str
    breaker: str
    from_who: Who | None
    to_who: Who | None
    at: str
    job_id: int


@dataclass(frozen=True)
class Entry:
    """A dated line of the record: a power change, an ignition switch, a tool, a part."""

    what: str
    by: Who | None
    at: str
    step_number: int | None = None
    detail: str = ""


@dataclass(frozen=True)
class DischargeLine:
    step_number: int
    required: str
    minimum: str
    computed: str               # the bleed-down estimate, advisory
    energy: str
    power_off_at: str
    confirmed_at: str
    served: str
    by: Who | None


@dataclass(frozen=True)
class PartLine:
    kind: str
    channel: str
    part_number: str
    serial: str
    type: str


@dataclass(frozen=True)
class WearChart:
    title: str
    where: str
    svg: str
    limit: str
    points: int
    trend: str


@dataclass(frozen=True)
class Signature:
    name: str
    authorisation: str
    kind: str
    meaning: str
    signed_at: str


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
    after_completion: list[str]
    chain_sha256: str
    chain_events: int
    chain_status: str
    refusals: list[Entry] = field(default_factory=list)
    record_revision: int = 1   # 1, then one more after each return and each amendment
    returns: list[Entry] = field(default_factory=list)      # sent back by a supervisor
    amendments: list[Entry] = field(default_factory=list)   # corrections after certification

    @property
    def findings(self) -> list[ReadingLine]:
        return [r for r in self.readings if r.finding]


# --- gathering -------------------------------------------------------------------------

def _consistent_read(db: Database, job_id: int) -> tuple[recording.Job, list[dict[str, Any]]]:
    """The job's state and its events as of one chain head (an entry arriving between the
    two reads would make the record print a log its state and hash do not cover)."""
    for _ in range(5):
        job = recording.load_job(db, job_id)
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
    who = _People(db)
    numbers = {p.id: p.number for p in state.steps}
    engine = fleet.engine(db, row["engine_id"]) or {}
    settings = fleet.settings(db)
    revision = procedure_store.revision(db, row["revision_hash"]) or {}
    procedure = state.procedure
    source = procedure.source
    broken = first_broken_link(events)
    sign_blocks, release = _sign_blocks(state, signatures or [])
    readings = [_reading_line(r, state, numbers, who) for r in state.readings]
    tags, handovers = _tags(db, row, state, who)
    tagged = _tags_by_step(events)
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
        steps=_dated([_step_line(p, tagged.get(p.id, ""), who) for p in state.steps]),
        readings=readings,
        tags=tags, handovers=handovers,
        power=_power(state, events, numbers, who),
        discharges=_discharges(state, numbers, who),
        ignition=_ignition(state, events, numbers, who),
        channel_runs=[f"Channel {c}: {clock.runs} run{'' if clock.runs == 1 else 's'}"
                      + (", still energised when printed" if clock.is_on else "")
                      + "; time past an on-limit: "
                      + (gates.mmss(clock.overrun_s) if clock.overrun_s > 0 else NONE)
                      for c, clock in sorted(state.clocks.items())],
        tools=_tools(state, numbers, who),
        parts=[PartLine(COMPONENT_WORDS.get(c.get("kind", ""), str(c.get("kind"))),
                        str(c.get("channel") or "—"), str(c.get("part_number")),
                        str(c.get("serial")), str(c.get("type")))
               for c in state.configuration.components],
        recorded_parts=_recorded_parts(state, numbers, who),
        wear_charts=_wear_charts(db, row, state),
        performers=_performers(events, row, state, who),
        sign_blocks=sign_blocks, release=release,
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
        returns=[Entry(r["data"]["reason"], who(r["person_id"]), station_time(r["received_at"]),
                       numbers.get(r["data"].get("repeat_from") or ""),
                       "work done again from this step on" if r["data"].get("repeat_from")
                       else "signatures only")
                 for r in state.returns],
        amendments=[Entry(a["data"]["what"], who(a["person_id"]),
                          station_time(a["received_at"]), numbers.get(a["step_id"]),
                          a["data"]["why"]) for a in state.amendments],
    )


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


def _tags_by_step(events: Sequence[Mapping[str, Any]]) -> dict[str, str]:
    """What each lockout step of this job did, in a few words: "T-1 on IGN-A; T-2 on IGN-B"."""
    said: dict[str, list[str]] = {}
    for e in events:
        if e["kind"] in ("breaker_tagged", "tag_removed") and e["step_id"]:
            number = str(e["data"].get("tag", "")).strip()
            said.setdefault(e["step_id"], []).append(
                f"{number} on {e['data']['breaker']}" if e["kind"] == "breaker_tagged"
                else f"{number} removed")
    return {step: "; ".join(words) for step, words in said.items()}


def _dated(lines: list[StepLine]) -> list[StepLine]:
    """Mark the steps where a new date starts, so each row need only print its time."""
    marked, last = [], None
    for line in lines:
        marked.append(replace(line, new_date=bool(line.done_on) and line.done_on != last))
        last = line.done_on or last
    return marked


def _step_line(progress: StepProgress, tagged: str, who: _People) -> StepLine:
    event = progress.event
    return StepLine(progress.number, progress.step.kind, progress.step.text.strip(),
                    progress.status, who(event["person_id"]) if event else None,
                    station_time(event["received_at"]) if event else "—",
                    _outcome(progress.step, event, tagged) if event else "")


def _outcome(step: Step, event: Mapping[str, Any], tagged: str) -> str:
    kind, data = event["kind"], event["data"]
    if kind == "acknowledged":
        return "acknowledged"
    if kind == "finding":
        return f"finding: {DISPOSITION_WORDS.get(data.get('disposition'), '')}"
    if isinstance(step, Lockout):
        return tagged or ("all tags off" if step.action == "release" else "")
    if kind in ("reading_recorded", "sparks_counted"):
        entered, converted = _entered(data)
        verdict = data.get("verdict", "")
        return " ".join(x for x in (entered, converted and f"= {converted}",
                                    VERDICT_SYMBOL.get(verdict, ""), verdict) if x)
    if kind == "energised":
        return "energised"
    if isinstance(step, Check) and step.items:
        return f"{len(step.items)} items confirmed"
    if isinstance(step, Check) and step.power:
        return f"exciter input {step.power}"
    return ""


def _entered(data: Mapping[str, Any]) -> tuple[str, str]:
    """(as entered, in the procedure's unit) for a reading's stored data."""
    if "rate" in data:
        how = (f"{data['count']} sparks in {data['window_s']:g} s" if data.get("method") == "timed"
               else f"{data.get('counted_sparks', len(data.get('taps', [])))} taps")
        return how, f"{data['rate']:.0f} per minute"
    if "value" in data and "unit" in data:
        entered = f"{data['value']:g} {unit_label(data['unit'])}"
        applied = data.get("applied", data["converted"])
        converted = f"{applied:.4g} {unit_label(data['procedure_unit'])}"
        return entered, converted
    if "result" in data:
        return str(data["result"]), ""
    return str(data.get("text", "")), ""


def _limits(step: Step | None) -> str:
    if isinstance(step, (Reading, Torque)) and step.limits is not None:
        return limits_text(step)
    if isinstance(step, SparkCount):
        low, high = step.limits.min, step.limits.max
        if low is not None and high is not None:
            return f"{low:g} to {high:g} per minute"
        return f"at least {low:g} per minute" if low is not None else f"at most {high:g} per minute"
    if isinstance(step, Reading) and step.value == "pass_fail":
        return "pass"
    return "—"


def _step(state: JobState, step_id: str) -> Step | None:
    position = state.positions.get(step_id)
    return state.applicable[position] if position is not None else None


def _short_name(step_id: str) -> str:
    """A step's id in words ("plug-torque" -> "plug torque"): the steps table has its text."""
    return step_id.replace("-", " ")


def _reading_line(r: Mapping[str, Any], state: JobState, numbers: Mapping[str, int],
                  who: _People) -> ReadingLine:
    entered, converted = _entered(r)
    verdict = r.get("verdict", "")
    line = ReadingLine(numbers.get(r["step"], 0), _short_name(r["step"]), r["attempt"],
                       entered, converted, _limits(_step(state, r["step"])), verdict,
                       VERDICT_SYMBOL.get(verdict, ""), "; ".join(_conditions(r)),
                       who(r.get("person_id")), station_time(r.get("received_at")))
    finding = r.get("finding")
    if finding:
        disposition = DISPOSITION_WORDS.get(finding.get("disposition"), "—")
        return replace(line, disposition=disposition, finding=finding.get("text", ""),
                       reference=finding.get("reference") or "—",
                       finding_by=who(finding.get("person_id")),
                       finding_at=station_time(finding.get("received_at")))
    if verdict == "out of limits":
        return replace(line, disposition="awaiting a finding")
    return line


def _conditions(r: Mapping[str, Any]) -> list[str]:
    """What was recorded with a reading besides its value: test conditions, usage, plug."""
    said = []
    for name in ("test_voltage", "ambient_temperature", "humidity"):
        c = r.get(name)
        if isinstance(c, Mapping):
            said.append(f"{name.replace('_', ' ')} {c['value']:g} {unit_label(c.get('unit'))}")
    usage = r.get("usage")
    if isinstance(usage, Mapping):
        said.append(f"at {usage.get('engine_hours', 0):g} FH, {usage.get('starts')} starts, "
                    f"{usage.get('continuous_ignition_hours', 0):g} h continuous ignition"
                    + (" (estimated)" if usage.get("continuous_ignition_estimated") else ""))
    if isinstance(r.get("plug"), Mapping):
        said.append(f"plug {r['plug'].get('part_number')} S/N {r['plug'].get('serial')}")
    if r.get("wrench_id"):
        said.append(f"wrench {r['wrench_id']}, calibration due {r['calibration_due']}")
    if isinstance(r.get("both_check"), Mapping):
        said.append(f"A + B check: {r['both_check'].get('result')}")
    return said


def _tag_instances(events: Iterable[Mapping[str, Any]]) -> list[list[Mapping[str, Any]]]:
    """Each tag's life on the engine, hung to removed (a number may be used again later)."""
    active: dict[str, list[Mapping[str, Any]]] = {}
    done: list[list[Mapping[str, Any]]] = []
    for e in events:
        number = str(e["data"].get("tag", "")).strip()
        if e["kind"] == "breaker_tagged":
            active[number] = [e]
            done.append(active[number])
        elif number in active:
            active[number].append(e)
            if e["kind"] == "tag_removed":
                del active[number]
    return done


def _tags(db: Database, row: Mapping[str, Any], state: JobState,
          who: _People) -> tuple[list[TagLine], list[Handover]]:
    labels = {b.id: b.label for s in state.applicable if isinstance(s, Lockout)
              for b in s.breakers}
    engine_events = job_store.engine_events(db, row["engine_id"], gates.TAG_EVENT_KINDS)
    lines: list[TagLine] = []
    handovers: list[Handover] = []
    for life in _tag_instances(engine_events):
        if not any(e["job_id"] == row["id"] for e in life):
            continue
        breaker = str(life[0]["data"].get("breaker"))
        shown = f"{breaker} ({labels[breaker]})" if breaker in labels else breaker
        owner = life[0]["person_id"]
        for e in life:
            data, detail = e["data"], ""
            action = {"breaker_tagged": "hung", "tag_taken_over": "taken over",
                      "tag_removed": "removed"}[e["kind"]]
            if e["kind"] == "tag_taken_over":
                detail = "breaker re-confirmed open" if data.get("breaker_confirmed_open") else ""
                handovers.append(Handover(str(data["tag"]).strip(), shown, who(owner),
                                          who(e["person_id"]), station_time(e["received_at"]),
                                          e["job_id"]))
                owner = e["person_id"]
            absent = data.get("absent_owner")
            if e["kind"] == "tag_removed" and isinstance(absent, Mapping):
                action = "removed (absent owner)"
                supervisor = who.by_username(str(absent.get("supervisor", "")))
                owner_who = who(owner)
                detail = (f"owner {owner_who.text if owner_who else '?'} absent; "
                          f"reason: {absent.get('reason', '')}; authorised by "
                          f"{supervisor.text}")
            lines.append(TagLine(str(data["tag"]).strip(), shown, action, who(e["person_id"]),
                                 station_time(e["received_at"]), e["job_id"],
                                 e["job_id"] != row["id"], detail))
    return lines, handovers


def _power(state: JobState, events: Sequence[Mapping[str, Any]], numbers: Mapping[str, int],
           who: _People) -> list[Entry]:
    lines = []
    for e in events:
        step = _step(state, e["step_id"]) if e["step_id"] else None
        if e["kind"] == "step_done" and isinstance(step, Check) and step.power:
            word = ("exciter input disconnected (power off)" if step.power == "removed"
                    else "exciter input reconnected")
            lines.append(Entry(word, who(e["person_id"]), station_time(e["received_at"]),
                                   numbers.get(step.id)))
        elif e["kind"] == "input_reconnected":
            lines.append(Entry("input reconnected before the work was done: the "
                                   "disconnection and discharge wait were done again",
                                   who(e["person_id"]), station_time(e["received_at"]), None))
    return lines


def _discharges(state: JobState, numbers: Mapping[str, int], who: _People) -> list[DischargeLine]:
    power_off = next((e for s, e in state.completed.items()
                      if isinstance(_step(state, s), Check)
                      and getattr(_step(state, s), "power", None) == "removed"), None)
    lines = []
    for step in state.applicable:
        if not isinstance(step, DischargeWait):
            continue
        need = gates.discharge_requirement(step)
        event = state.completed.get(step.id)
        served = "—"
        if event is not None and power_off is not None:
            seconds = (datetime.fromisoformat(event["received_at"])
                       - datetime.fromisoformat(power_off["received_at"])).total_seconds()
            served = gates.mmss(seconds)
        computed = "—"
        if need.computed_s is not None:
            computed = (f"{gates.mmss(need.computed_s)} (bleed-down from "
                        f"{step.capacitor.charge_voltage if step.capacitor else ''} to "
                        f"{step.capacitor.safe_voltage if step.capacitor else ''}; advisory)")
        energy = f"{need.energy_j:.1f} J at full charge" if need.energy_j is not None else "—"
        lines.append(DischargeLine(
            numbers[step.id], gates.mmss(need.required_s), gates.mmss(need.minimum_s),
            computed, energy,
            station_time(power_off["received_at"]) if power_off else "—",
            station_time(event["received_at"]) if event else "not yet served", served,
            who(event["person_id"]) if event else None))
    return lines


def _ignition(state: JobState, events: Sequence[Mapping[str, Any]], numbers: Mapping[str, int],
              who: _People) -> list[Entry]:
    lines = []
    for e in events:
        step = _step(state, e["step_id"]) if e["step_id"] else None
        when, by = station_time(e["received_at"]), who(e["person_id"])
        if e["kind"] == "energised" and isinstance(step, IgnitionRun):
            lines.append(Entry("energised", by, when, numbers.get(step.id),
                               "A and B" if step.channel == "both" else step.channel))
        elif e["kind"] == "de_energised":
            lines.append(Entry("de-energised", by, when, None, e["data"].get("channel") or "all"))
        elif e["kind"] == "step_done" and isinstance(step, Check) and step.ignition_off:
            lines.append(Entry("de-energised (ignition selector off)", by, when,
                               numbers.get(step.id), "all"))
    return lines


def _tools(state: JobState, numbers: Mapping[str, int], who: _People) -> list[Entry]:
    lines = []
    for r in state.readings:
        if not r.get("wrench_id"):
            continue
        adapter = r.get("adapter")
        adapter_text = (f"adapter: wrench length {adapter['wrench_length']:g}, extension "
                        f"{adapter['extension']:g}; torque applied {adapter['applied']:.4g} "
                        f"{unit_label(r['procedure_unit'])}" if isinstance(adapter, Mapping)
                        else "no adapter")
        lines.append(Entry(f"torque wrench {r['wrench_id']}, calibration due "
                           f"{r['calibration_due']}", who(r.get("person_id")),
                           station_time(r["received_at"]), numbers.get(r["step"]),
                           adapter_text))
    return lines


def _recorded_parts(state: JobState, numbers: Mapping[str, int], who: _People) -> list[Entry]:
    lines = []
    for r in state.readings:
        step = _step(state, r["step"])
        if isinstance(step, Reading) and step.value == "text" and _PART_READING.search(step.id):
            lines.append(Entry(step.text.strip(), who(r.get("person_id")),
                               station_time(r.get("received_at")), numbers.get(step.id),
                               str(r.get("text", ""))))
    return lines


def _wear_charts(db: Database, row: Mapping[str, Any], state: JobState) -> list[WearChart]:
    """A wear chart for each plug gauged on this job: its history up to and with this job."""
    charts = []
    seen: set[int] = set()
    for r in state.readings:
        plug = r.get("plug")
        if not isinstance(plug, Mapping) or plug.get("id") in seen:
            continue
        step = _step(state, r["step"])
        if not isinstance(step, Reading) or step.limits is None or step.limits.max is None:
            continue
        seen.add(plug["id"])
        history = wear_store.plug_history(db, plug["id"])
        rows = [p for p in (history or {}).get("points", [])
                if p["job_id"] is None or p["job_id"] <= row["id"]]
        if not rows:  # the plug is no longer installed: chart this job's gauging alone
            rows = [{"engine_hours": x["usage"]["engine_hours"], "erosion_mm": x["converted"],
                     "passed": None, "continuous_ignition_estimated": False}
                    for x in state.readings if isinstance(x.get("plug"), Mapping)
                    and x["plug"].get("id") == plug["id"] and isinstance(x.get("usage"), Mapping)]
        points = [wear.WearPoint(usage=float(p["engine_hours"]), erosion_mm=p["erosion_mm"],
                                 passed=p["passed"], estimated=p["continuous_ignition_estimated"])
                  for p in rows if p["engine_hours"] is not None]
        fit = wear.wear_rate(points)
        title = f"Igniter plug wear · {plug.get('part_number')} S/N {plug.get('serial')}"
        where = (f"{row['registration']} engine {row['position']} channel {plug.get('channel')}")
        limit = step.limits.max
        charts.append(WearChart(title, where, wear_chart_svg(points, limit,
                                                      fit=None if fit.too_few else fit,
                                                      title=title, usage_label=USAGE_LABEL),
                                f"{limit:.2f} mm", len(points), fit.reason))
    return charts


def _performers(events: Sequence[Mapping[str, Any]], row: Mapping[str, Any], state: JobState,
                who: _People) -> list[PersonLine]:
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
                     signed_at=station_time(raw.get("signed_at")))


def _role_of(raw: Mapping[str, Any]) -> str | None:
    if raw.get("role") in SIGN_MEANINGS:
        return str(raw["role"])
    meaning = str(raw.get("meaning", "")).lower()
    return next((role for word, role in _MEANING_WORDS.items() if word in meaning), None)


def _sign_blocks(state: JobState, signatures: Sequence[Mapping[str, Any]]
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
