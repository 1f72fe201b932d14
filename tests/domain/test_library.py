"""The shop's procedure library in tasks/: every file valid, the whole format used."""

from __future__ import annotations

from pathlib import Path

import pytest

from webapp.domain.procedure_files import parse_procedure
from webapp.domain.procedures import EXCITER_TYPES, PLUG_TYPES, STEP_KINDS, Procedure, SparkCount

TASKS = Path(__file__).parents[2] / "tasks"
FILES = sorted(TASKS.glob("*.yaml"))
REQUIRED = ("exciter-removal", "exciter-installation", "igniter-plug-replacement",
            "ignition-lead-inspection", "ignition-functional-check")


def load(path: Path) -> Procedure:
    return parse_procedure(path.read_text(encoding="utf-8"), path.name)


@pytest.fixture(scope="module")
def library() -> dict[str, Procedure]:
    return {path.stem: load(path) for path in FILES}


def test_library_is_not_empty():
    assert len(FILES) >= len(REQUIRED)


@pytest.mark.parametrize("path", FILES, ids=[p.name for p in FILES])
def test_every_file_parses_and_is_named_by_its_id(path):
    assert load(path).id == path.stem


@pytest.mark.parametrize("procedure_id", REQUIRED)
def test_required_procedure_present(library, procedure_id):
    assert procedure_id in library


def test_library_uses_every_step_kind(library):
    used = {step.kind for p in library.values() for step in p.steps}
    assert used == set(STEP_KINDS)


def test_every_exciter_and_plug_type_is_covered(library):
    exciters = {t for p in library.values() for t in p.effectivity.exciter_types}
    plugs = {t for p in library.values() for t in p.effectivity.plug_types}
    assert exciters == set(EXCITER_TYPES)
    assert plugs == set(PLUG_TYPES)


def test_steps_differ_by_exciter_and_by_plug_type(library):
    conditions = [s.when for p in library.values() for s in p.steps if s.when is not None]
    assert any(c.exciter_types for c in conditions)
    assert any(c.plug_types for c in conditions)


def test_functional_check_counts_each_channel_and_both(library):
    check = library["ignition-functional-check"]
    assert check.channel == "all"
    for exciter in ("dc", "transistorised", "ac"):
        counts = [s for s in check.steps_for([exciter], ["air-gap"]) if isinstance(s, SparkCount)]
        assert sorted(s.channel for s in counts) == ["A", "B", "both"]
        assert all(s.mode is None for s in counts)
    # A combination unit: each channel and both, in each of its two modes.
    counts = [s for s in check.steps_for(["combination"], ["air-gap"])
              if isinstance(s, SparkCount)]
    assert sorted((s.channel, s.mode or "") for s in counts) == [
        ("A", "continuous"), ("A", "start"), ("B", "continuous"), ("B", "start"),
        ("both", "continuous"), ("both", "start")]
    both = next(s for s in check.steps if isinstance(s, SparkCount) and s.channel == "both")
    assert both.both_tolerance is not None


@pytest.mark.parametrize("exciter", EXCITER_TYPES)
def test_functional_check_runs_ignition_with_a_duty_cycle_for_each_exciter(library, exciter):
    steps = library["ignition-functional-check"].steps_for([exciter], ["air-gap"])
    runs = [s for s in steps if s.kind == "ignition_run"]
    assert sorted(r.channel for r in runs) == ["A", "B", "both"]
