"""The work record's steps, readings and findings (sections 3, 4 and 6), line by line."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any

from ..domain.exciter_rows import limits_for
from ..domain.execution import JobState, StepProgress
from ..domain.procedures import EXCITER_MODES, Check, Lockout, Reading, SparkCount, Step, Torque
from ..domain.readings import VERDICT_SYMBOL
from ..domain.usage import totals_said
from ..shown import limits_text, unit_label
from .record_entries import People, Who, station_time, step_of

DISPOSITION_WORDS = {"replaced": "replaced", "repaired": "repaired", "re-tested": "re-tested",
                     "deferred": "deferred"}
NEEDS_RETEST = ("replaced", "repaired", "re-tested")


@dataclass(frozen=True)
class StepLine:
    number: int
    kind: str
    text: str
    status: str                 # done, next, waiting
    done_by: Who | None
    done_at: str                # the full station time, "2026-12-01 08:02:00 UTC"
    outcome: str = ""           # what the completing entry recorded, in a few words
    show_date: bool = True      # done on another date than the record's: the row prints it

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


def tags_by_step(events: Sequence[Mapping[str, Any]]) -> dict[str, str]:
    """What each lockout step of this job did, in a few words: "T-1 on IGN-A; T-2 on IGN-B"."""
    said: dict[str, list[str]] = {}
    for e in events:
        if e["kind"] in ("breaker_tagged", "tag_removed") and e["step_id"]:
            number = str(e["data"].get("tag", "")).strip()
            said.setdefault(e["step_id"], []).append(
                f"{number} on {e['data']['breaker']}"
                + (" (found hanging)" if e["data"].get("confirmed_existing") else "")
                if e["kind"] == "breaker_tagged" else f"{number} removed")
    return {step: "; ".join(words) for step, words in said.items()}


def dated(lines: list[StepLine], record_date: str) -> list[StepLine]:
    """Mark the rows whose date is not the record's (the job's opening date): those print
    their date with the time, so a row read alone on any page still says when it was done."""
    return [replace(line, show_date=bool(line.done_on) and line.done_on != record_date)
            for line in lines]


def step_line(progress: StepProgress, tagged: str, who: People) -> StepLine:
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
        confirmed = [step.items[i] for i in data.get("items", [])
                     if isinstance(i, int) and 0 <= i < len(step.items)]
        return "confirmed: " + "; ".join(f"✓ {item.strip()}" for item in confirmed)
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
        # A count stored before limits were kept with it: the step's own (narrowest) row.
        judged = limits_for(step.limits, ()).limits
        low, high = judged.min, judged.max
        if low is not None and high is not None:
            return f"{low:g} to {high:g} per minute"
        return f"at least {low:g} per minute" if low is not None else f"at most {high:g} per minute"
    if isinstance(step, Reading) and step.value == "pass_fail":
        return "pass"
    return "—"


STEP_WORDS_LENGTH = 60   # characters: a reading's name fits two lines of its column


def step_words(step: Step | None) -> str:
    """A reading's name: its step's own words, the first sentence, cut at a word near
    STEP_WORDS_LENGTH with an ellipsis. Never the step's internal id: a step the job no
    longer has (a revision changed it) is named as such."""
    if step is None:
        return "(a step this job's procedure no longer has)"
    first = step.text.strip().split(". ")[0].rstrip(".")
    if len(first) <= STEP_WORDS_LENGTH:
        return first
    cut = first[:STEP_WORDS_LENGTH + 1].rsplit(" ", 1)[0].rstrip(",;:")
    return cut + "…"


def _retest_words(r: Mapping[str, Any], state: JobState, done: str) -> str:
    """"re-tested" is printed only with the re-test reading that backs it, and its value."""
    later = [x for x in state.readings if x["step"] == r["step"] and x["attempt"] > r["attempt"]
             and x.get("fastener") == r.get("fastener")]
    if not later:
        return f"{done}; re-test reading not yet recorded"
    entered, converted = _entered(later[0])
    verdict = later[0].get("verdict", "")
    said = " ".join(x for x in (entered, converted != entered and f"= {converted}",
                                VERDICT_SYMBOL.get(verdict, ""), verdict) if x)
    head = "re-tested" if done == "re-tested" else f"{done}, re-tested"
    return f"{head}: attempt {later[0]['attempt']}, {said}"


def _count_limits(r: Mapping[str, Any]) -> str | None:
    """A spark count's limits as the station judged it (stored with the count), with the
    row they came from and the mode it was counted in."""
    limits = r.get("limits")
    if r.get("kind") != "spark_count" or not isinstance(limits, Mapping):
        return None
    low, high = limits.get("min"), limits.get("max")
    said = (f"{low:g} to {high:g} per minute" if low is not None and high is not None
            else f"at least {low:g} per minute" if low is not None
            else f"at most {high:g} per minute")
    source = r.get("limits_from")
    if source == "default":
        said += " (default row: no row for the fitted exciter's part number)"
    elif source == "procedure":
        said += " (procedure)"
    elif source:
        said += (f" (row for part number {source})" if source in (r.get("exciters") or {})
                 .values() else f" ({source})")
    if r.get("mode"):
        said = f"{EXCITER_MODES[r['mode']]} mode: {said}"
    return said


def reading_line(r: Mapping[str, Any], state: JobState, numbers: Mapping[str, int],
                 who: People) -> ReadingLine:
    entered, converted = _entered(r)
    verdict = r.get("verdict", "")
    name = (step_words(step_of(state, r["step"]))
            + (f": {r['fastener']}" if r.get("fastener") else ""))
    limits = _count_limits(r) or _limits(step_of(state, r["step"]))
    line = ReadingLine(numbers.get(r["step"], 0), name, r["attempt"],
                       entered, converted, limits, verdict,
                       VERDICT_SYMBOL.get(verdict, ""), "; ".join(_conditions(r)),
                       who(r.get("person_id")), station_time(r.get("received_at")))
    finding = r.get("finding")
    if finding:
        disposition = DISPOSITION_WORDS.get(finding.get("disposition"), "—")
        if finding.get("disposition") in NEEDS_RETEST:
            disposition = _retest_words(r, state, finding["disposition"])
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
        said.append(totals_said(usage))
    if isinstance(r.get("plug"), Mapping):
        said.append(f"plug {r['plug'].get('part_number')} S/N {r['plug'].get('serial')}")
    if r.get("wrench_id"):
        said.append(f"wrench {r['wrench_id']}, calibration due {r['calibration_due']}")
    if isinstance(r.get("instrument"), Mapping):
        said.append(f"{r['instrument']['kind']} {r['instrument']['id']}, calibration due "
                    f"{r['instrument']['calibration_due']}")
    if isinstance(r.get("both_check"), Mapping):
        said.append(f"A + B check: {r['both_check'].get('result')}")
    if isinstance(r.get("exciters"), Mapping):
        said.append("exciter " + ", ".join(f"{c} {p or 'not known'}"
                                           for c, p in sorted(r["exciters"].items())))
    supply = r.get("supply")
    if isinstance(supply, Mapping) and isinstance(supply.get("voltage_limits"), Mapping):
        lim = supply["voltage_limits"]
        said.append(f"supply {supply['voltage']:g} V ({lim.get('min')}–{lim.get('max')} V, "
                    f"{supply.get('limits_from', '')})"
                    + (f", {supply['frequency']:g} Hz" if "frequency" in supply else ""))
    return said
