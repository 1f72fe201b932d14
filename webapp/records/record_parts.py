"""The work record's parts and wear (sections 7 and 8): tools, parts, plug wear charts."""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from ..charts import wear_chart_svg
from ..domain import usage, wear
from ..domain.execution import JobState
from ..domain.procedures import PartChange, Reading
from ..domain.usage import totals_said
from ..shown import unit_label
from ..store import Database
from ..store import wear as wear_store
from .record_entries import Entry, People, station_time, step_of

COMPONENT_WORDS = {"exciter": "Ignition exciter", "lead": "High-tension lead",
                   "plug": "Igniter plug"}
# Text readings that name a part: their values belong in the parts section as well.
_PART_READING = re.compile(r"serial|part-number|release")


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
    basis: str = ""   # what the chart's usage is reckoned from


def _instrument_text(r: Mapping[str, Any]) -> str | None:
    """The instrument a reading was taken with, as the record prints it: from the register
    (kind, ID, range, calibration due), or as typed on a torque reading stored before the
    register (wrench ID and its due date)."""
    used = r.get("instrument")
    if isinstance(used, Mapping):
        return (f"{used['kind']} {used['id']} (range {used['range_low']:g}–"
                f"{used['range_high']:g} {unit_label(used['range_unit'])}), calibration due "
                f"{used['calibration_due']}")
    if r.get("wrench_id"):
        return f"torque wrench {r['wrench_id']}, calibration due {r['calibration_due']}"
    return None


def _reading_said(r: Mapping[str, Any]) -> str:
    """The reading an instrument took, and for a torque its adapter."""
    if r.get("value") is not None:
        said = f"{r['value']:g} {unit_label(r.get('unit'))}"
    elif r.get("window_s") is not None:
        said = f"window {r['window_s']:g} s"
    else:
        said = str(r.get("result") or "")
    if r.get("fastener"):
        said += f" ({r['fastener']})"
    adapter = r.get("adapter")
    if isinstance(adapter, Mapping):
        said += (f"; adapter: wrench length {adapter['wrench_length']:g}, extension "
                 f"{adapter['extension']:g} at {adapter.get('angle', 0):g}° to the wrench; "
                 f"torque applied {adapter['applied']:.4g} {unit_label(r['procedure_unit'])}")
    elif r.get("wrench_id") or (r.get("instrument") or {}).get("kind") == "torque wrench":
        said += "; no adapter"
    return said


def tool_entries(state: JobState, numbers: Mapping[str, int], who: People) -> list[Entry]:
    """Each reading taken with a calibrated instrument: the instrument, and the reading."""
    lines = []
    for r in state.readings:
        used = _instrument_text(r)
        if used is None:
            continue
        lines.append(Entry(used, who(r.get("person_id")), station_time(r["received_at"]),
                           numbers.get(r["step"]), _reading_said(r)))
    return lines


def _part_text(r: Mapping[str, Any]) -> str:
    """A part step's fields as the record prints them (every field, none left out)."""
    usage = r.get("usage") or {}
    used = totals_said(usage) if usage else "engine usage not recorded"
    if r.get("action") == "remove":
        text = (f"REMOVED from channel {r['channel']}: P/N {r['part_number']}, S/N {r['serial']}"
                f"; {'unserviceable' if r['status'] == 'unserviceable' else 'removed serviceable'}"
                f", reason {r['reason']}, tag {r['tag']}; {used}")
    else:
        text = (f"FITTED on channel {r['channel']}: P/N {r['part_number']}"
                f"{' (alternate)' if r.get('interchangeability') == 'alternate' else ''}, "
                f"S/N {r['serial']}; release certificate {r['release']}, {r['condition']}; "
                f"{used}")
    expected = r.get("expected")
    if r.get("verdict") == "mismatch" and isinstance(expected, Mapping):
        text += (f". MISMATCH: the station had P/N {expected['part_number']} S/N "
                 f"{expected['serial']} fitted here (see the finding)")
    return text


def recorded_parts(state: JobState, numbers: Mapping[str, int], who: People) -> list[Entry]:
    lines = []
    for r in state.readings:
        step = step_of(state, r["step"])
        if isinstance(step, PartChange):
            lines.append(Entry(step.text.strip().split(".")[0], who(r.get("person_id")),
                               station_time(r.get("received_at")), numbers.get(step.id),
                               _part_text(r)))
        elif isinstance(step, Reading) and step.value == "text" and _PART_READING.search(step.id):
            lines.append(Entry(step.text.strip(), who(r.get("person_id")),
                               station_time(r.get("received_at")), numbers.get(step.id),
                               str(r.get("text", ""))))
    return lines


def wear_charts(db: Database, row: Mapping[str, Any], state: JobState) -> list[WearChart]:
    """A wear chart for each plug gauged on this job: its history up to and with this job."""
    charts = []
    seen: set[int] = set()
    for r in state.readings:
        plug = r.get("plug")
        if not isinstance(plug, Mapping) or plug.get("id") in seen:
            continue
        step = step_of(state, r["step"])
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
        rows = [p for p in rows if p["engine_hours"] is not None]
        # Against engine hours since the plug's fit where known, as on the fleet pages.
        basis = usage.wear_basis(rows, (history or {}).get("fit"))
        points = [wear.WearPoint(usage=basis.usage_of(i, float(p["engine_hours"])),
                                 erosion_mm=p["erosion_mm"], passed=p["passed"],
                                 estimated=p["continuous_ignition_estimated"])
                  for i, p in enumerate(rows)]
        fit = wear.wear_rate(points)
        title = f"Igniter plug wear · {plug.get('part_number')} S/N {plug.get('serial')}"
        where = (f"{row['registration']} engine {row['position']} channel {plug.get('channel')}")
        limit = step.limits.max
        charts.append(WearChart(title, where, wear_chart_svg(points, limit,
                                                      fit=None if fit.too_few else fit,
                                                      title=title, usage_label=basis.label),
                                f"{limit:.2f} mm", len(points), fit.reason, basis.said))
    return charts
