"""The record's instrument lines (records.record_parts.tool_entries) from a job's stored
readings: a register instrument, and a torque reading stored before the register (a typed
wrench ID and due date), which stays printable. IDs and dates are invented."""

from __future__ import annotations

from pathlib import Path

from tests.domain.gate_events import _event, _Job
from webapp.domain.procedure_files import parse_procedure
from webapp.records.record_parts import tool_entries

TASKS = Path(__file__).resolve().parents[2] / "tasks"
INSTALLATION = parse_procedure((TASKS / "exciter-installation.yaml").read_text(
    encoding="utf-8"))
BOLT = "Bolt 1, upper forward"


def _lines(*readings):
    job = _Job(INSTALLATION, "A")
    for at_s, data in enumerate(readings):
        # Stored events as an older station kept them: applied without today's checks.
        job.apply(_event("reading_recorded", "mounting-torque", data, at_s=at_s))
    return tool_entries(job.state, {"mounting-torque": 9}, lambda _person: None)


def test_a_reading_stored_with_a_typed_wrench_id_still_prints_its_wrench():
    [line] = _lines({"value": 37.0, "unit": "lbf*in", "converted": 37.0,
                     "procedure_unit": "lbf*in", "applied": 37.0, "verdict": "within",
                     "margin": 2.0, "fastener": BOLT, "wrench_id": "TW-OLD",
                     "calibration_due": "2026-06-30"})
    assert line.what == "torque wrench TW-OLD, calibration due 2026-06-30"
    assert line.step_number == 9
    assert line.detail == f"37 lbf·in ({BOLT}); no adapter"


def test_a_register_instrument_prints_with_its_range_and_due_date_against_its_reading():
    [line] = _lines({"value": 4.2, "unit": "N*m", "converted": 37.17,
                     "procedure_unit": "lbf*in", "applied": 37.17, "verdict": "within",
                     "margin": 2.17, "fastener": BOLT,
                     "instrument": {"id": "TW-7", "kind": "torque wrench",
                                    "range": "20–100 lbf*in", "range_low": 20.0,
                                    "range_high": 100.0, "range_unit": "lbf*in",
                                    "calibration_due": "2027-06-30"}})
    assert line.what == ("torque wrench TW-7 (range 20–100 lbf·in), calibration due "
                         "2027-06-30")
    assert line.detail == f"4.2 N·m ({BOLT}); no adapter"
