"""Procedure format: validation problems, content hash and effectivity."""

from __future__ import annotations

import textwrap

import pytest

from webapp.domain.procedure_files import (
    ProcedureInvalid,
    ProcedureProblem,
    content_hash,
    parse_procedure,
)

FILE = "demo-task.yaml"

# One check step: the smallest procedure body that is valid.
ONE_CHECK = """
- id: look
  kind: check
  text: Look at the exciter.
"""

# Everything but the steps; values are invented demo data.
FIXED_PARTS = """\
source:
  document: QT-610 Engine Maintenance Manual (demo data)
  section: 74-10-01, Ignition exciter — removal/installation
  revision: Rev 14, 2026-03-02
effectivity:
  engine_models: [QT-610]
  exciter_types: [dc, transistorised, ac]
  plug_types: [air-gap, surface-discharge]
preliminary:
  conditions: [Engine shut down.]
  tools: none
  supplies: none
  spares: none
  safety: [The exciter can hold a lethal charge.]
after_completion: none
"""


def procedure_text(*steps: str, **top: str) -> str:
    """A minimal valid procedure with the given steps (pieces of YAML list text, each
    indented as it likes) and top-level fields."""
    fields = {"id": "demo-task", "title": "Demo task", "ata": "74-10",
              "kind": "inspection", "channel": "one"} | top
    head = "".join(f"{name}: {value}\n" for name, value in fields.items())
    body = "".join(textwrap.dedent(piece).strip("\n") + "\n" for piece in steps or [ONE_CHECK])
    return head + FIXED_PARTS + "steps:\n" + textwrap.indent(body, "  ")


def problems_in(text: str) -> list[ProcedureProblem]:
    with pytest.raises(ProcedureInvalid) as raised:
        parse_procedure(text, FILE)
    return raised.value.problems


def only_problem(text: str) -> ProcedureProblem:
    problems = problems_in(text)
    assert len(problems) == 1, problems
    return problems[0]


def check_step(step_id: str, **extra: str) -> str:
    lines = [f"- id: {step_id}", "  kind: check", f"  text: Do {step_id}."]
    lines += [f"  {name}: {value}" for name, value in extra.items()]
    return "\n".join(lines) + "\n"


# --- the helper itself --------------------------------------------------------------------

def test_minimal_procedure_is_valid():
    procedure = parse_procedure(procedure_text(), FILE)
    assert procedure.id == "demo-task"
    assert [s.id for s in procedure.steps] == ["look"]
    assert procedure.preliminary.tools == "none"


# --- step kinds ---------------------------------------------------------------------------

def test_unknown_kind():
    problem = only_problem(procedure_text("""
        - id: look
          kind: gate
          text: Look at the exciter.
    """))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 1, "look", "kind")
    assert "unknown step kind 'gate'" in problem.message
    assert "discharge_wait" in problem.message  # the known kinds are listed


def test_missing_kind():
    problem = only_problem(procedure_text(check_step("first"), """
        - id: look
          text: Look at the exciter.
    """))
    assert (problem.file, problem.step_number, problem.step_id) == (FILE, 2, "look")
    assert "every step needs a kind" in problem.message


def test_missing_kind_names_the_kind_field():
    problem = only_problem(procedure_text("""
        - id: look
          text: Look at the exciter.
    """))
    assert problem.field == "kind"


def test_misspelled_field():
    problem = only_problem(procedure_text("""
        - id: look
          kind: check
          text: Look at the exciter.
          itmes: [Data plate]
    """))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 1, "look", "itmes")
    assert "not a field of this step kind" in problem.message


# --- readings and limits ------------------------------------------------------------------

NUMBER_WITHOUT_LIMITS = """
- id: erosion
  kind: reading
  text: Gauge the plug erosion.
  value: number
  unit: mm
"""


def test_number_reading_without_limits():
    problem = only_problem(procedure_text(NUMBER_WITHOUT_LIMITS))
    assert (problem.file, problem.step_number, problem.step_id) == (FILE, 1, "erosion")
    assert "needs its limits" in problem.message


def test_number_reading_without_limits_names_the_limits_field():
    assert only_problem(procedure_text(NUMBER_WITHOUT_LIMITS)).field == "limits"


def test_limits_min_above_max():
    problem = only_problem(procedure_text("""
        - id: plug-torque
          kind: torque
          text: Torque the plug.
          unit: lbf*in
          limits: {min: 300, max: 250}
          lubricant: Thread compound
    """))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 1, "plug-torque", "limits")
    assert "min 300.0 is above max 250.0" in problem.message


# --- units --------------------------------------------------------------------------------

def torque_step(unit: str) -> str:
    return f"""
        - id: plug-torque
          kind: torque
          text: Torque the plug.
          unit: {unit}
          limits: {{min: 250, max: 300}}
          lubricant: Thread compound
    """


def test_torque_unit_that_is_not_a_unit():
    problem = only_problem(procedure_text(torque_step("in-lb")))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 1, "plug-torque", "unit")
    assert "'in-lb' is not a unit" in problem.message


def test_torque_unit_of_wrong_dimension():
    problem = only_problem(procedure_text(torque_step("N")))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 1, "plug-torque", "unit")
    assert problem.message.startswith("'N' is a unit of")
    assert problem.message.endswith("but torque is needed here")


def test_torque_unit_of_force_is_named_as_force():
    problem = only_problem(procedure_text(torque_step("lbf")))
    assert (problem.step_id, problem.field) == ("plug-torque", "unit")
    assert "'lbf' is a unit of force, but torque is needed here" in problem.message


@pytest.mark.parametrize("unit", ["lbf*in", "lbf*ft", "kgf*cm"])
def test_torque_in_inch_pounds_and_others_is_valid(unit):
    assert parse_procedure(procedure_text(torque_step(unit)), FILE).steps[0].unit == unit


def test_si_torque_and_force_units_are_recognised():
    # NIST SP 811 B.9: the newton metre is the SI unit of torque (1 lbf·in = 0.1129848 N·m)
    assert parse_procedure(procedure_text(torque_step("N*m")), FILE).steps[0].unit == "N*m"
    assert "'N' is a unit of force" in only_problem(procedure_text(torque_step("N"))).message


def discharge_step(minimum: str) -> str:
    return f"""
        - id: discharge
          kind: discharge_wait
          text: Wait for the capacitor to bleed down.
          minimum: {minimum}
    """


def test_discharge_wait_minimum_without_unit():
    problem = only_problem(procedure_text(discharge_step("'2'")))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 1, "discharge", "minimum")
    assert "needs a number and a unit" in problem.message


def test_discharge_wait_minimum_as_bare_number_is_refused():
    problem = only_problem(procedure_text(discharge_step("2")))
    assert (problem.step_number, problem.step_id, problem.field) == (1, "discharge", "minimum")


def test_discharge_wait_minimum_as_bare_number_says_unit_missing():
    problem = only_problem(procedure_text(discharge_step("2")))
    assert "has no unit" in problem.message


def test_discharge_wait_minimum_of_wrong_dimension():
    problem = only_problem(procedure_text(discharge_step("2 V")))
    assert (problem.step_number, problem.step_id, problem.field) == (1, "discharge", "minimum")
    assert "'V' is a unit of voltage, but time is needed" in problem.message


def test_discharge_wait_minimum_negative_is_refused():
    problem = only_problem(procedure_text(discharge_step("-2 min")))
    assert (problem.step_id, problem.field) == ("discharge", "minimum")


def test_duty_cycle_given_two_ways():
    problem = only_problem(procedure_text("""
        - id: run-a
          kind: ignition_run
          text: Energise channel A.
          channel: A
          duty_cycle:
            pattern: ["on 2 min", "off 3 min"]
            max_on: 2 min
            min_off: 3 min
    """))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 1, "run-a", "duty_cycle")
    assert "give exactly one of pattern" in problem.message


# --- WARNING / CAUTION / NOTE placement ---------------------------------------------------

def test_warning_placed_after_the_step_it_guards():
    problem = only_problem(procedure_text(check_step("breakers"), """
        - id: lethal
          kind: warning
          text: The exciter can hold a lethal charge.
          guards: breakers
    """, check_step("after")))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 2, "lethal", "guards")
    assert "must stand before the step it guards, but 'breakers' is step 1" in problem.message


def test_warning_with_no_step_after_it():
    problem = only_problem(procedure_text(check_step("look"), """
        - id: lethal
          kind: warning
          text: The exciter can hold a lethal charge.
    """))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 2, "lethal", "guards")
    assert "no step follows it" in problem.message


def test_caution_before_warning_in_the_same_run():
    problem = only_problem(procedure_text("""
        - id: cap-it
          kind: caution
          text: Cap the connector.
        - id: lethal
          kind: warning
          text: The exciter can hold a lethal charge.
    """, check_step("disconnect")))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 2, "lethal", "kind")
    assert "a WARNING must come before a CAUTION" in problem.message


def test_warning_caution_note_in_order_is_valid():
    procedure = parse_procedure(procedure_text("""
        - id: lethal
          kind: warning
          text: The exciter can hold a lethal charge.
        - id: cap-it
          kind: caution
          text: Cap the connector.
        - id: input-first
          kind: note
          text: The input comes off first.
    """, check_step("disconnect")), FILE)
    assert [s.kind for s in procedure.steps] == ["warning", "caution", "note", "check"]


def test_guards_names_a_step_that_does_not_exist():
    problem = only_problem(procedure_text("""
        - id: lethal
          kind: warning
          text: The exciter can hold a lethal charge.
          guards: nowhere
    """, check_step("look")))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 1, "lethal", "guards")
    assert "guards 'nowhere', which is not a step" in problem.message


# --- ids, YAML and header -----------------------------------------------------------------

def test_duplicate_step_id():
    problem = only_problem(procedure_text(check_step("look"), check_step("look")))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, 2, "look", "id")
    assert "step 1 already uses 'look'" in problem.message


def test_invalid_yaml_gives_the_line():
    text = procedure_text("""
        - id: look
          kind: check
          text: Open: the breakers
    """)
    bad_line = text.splitlines().index("    text: Open: the breakers") + 1
    problem = only_problem(text)
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, None, None, None)
    assert f"not valid YAML at line {bad_line}" in problem.message


def test_ata_outside_chapter_74():
    problem = only_problem(procedure_text(ata="72-00"))
    assert (problem.file, problem.step_number, problem.step_id, problem.field) == (
        FILE, None, None, "ata")
    assert "74-" in problem.message


def test_several_problems_reported_at_once():
    problems = problems_in(procedure_text(check_step("look") + check_step("look"), """
        - id: erosion
          kind: reading
          text: Gauge the plug erosion.
          value: number
          unit: furlong-ish
          limits: {max: 1.2}
        - id: plug-torque
          kind: torque
          text: Torque the plug.
          unit: N
          limits: {min: 250, max: 300}
          lubricant: Thread compound
    """, ata="7410"))
    found = {(p.step_number, p.step_id, p.field) for p in problems}
    assert found == {(2, "look", "id"), (3, "erosion", "unit"), (4, "plug-torque", "unit"),
                     (None, None, "ata")}
    assert all(p.file == FILE for p in problems)


# --- content hash -------------------------------------------------------------------------

def test_content_hash_ignores_line_endings():
    lf = procedure_text()
    crlf = lf.replace("\n", "\r\n")
    assert crlf != lf
    assert content_hash(crlf) == content_hash(lf)
    assert len(content_hash(lf)) == 64  # SHA-256 in hex


def test_content_hash_changes_with_content():
    assert content_hash(procedure_text()) != content_hash(procedure_text(title="Demo task 2"))


# --- effectivity and configuration --------------------------------------------------------

BY_TYPE = """
- id: common
  kind: check
  text: Done on every configuration.
- id: ac-only
  kind: check
  text: Open the inverter supply.
  when: {exciter_types: [ac]}
- id: dc-or-transistorised
  kind: check
  text: Read the DC input current.
  when: {exciter_types: [dc, transistorised]}
- id: surface-discharge-only
  kind: check
  text: Leave the firing end as it is.
  when: {plug_types: [surface-discharge]}
- id: ac-with-air-gap
  kind: check
  text: Only an AC exciter feeding an air-gap plug.
  when: {exciter_types: [ac], plug_types: [air-gap]}
"""


@pytest.mark.parametrize(("exciters", "plugs", "expected"), [
    (["dc"], ["air-gap"], ["common", "dc-or-transistorised"]),
    (["transistorised"], ["surface-discharge"],
     ["common", "dc-or-transistorised", "surface-discharge-only"]),
    (["ac"], ["air-gap"], ["common", "ac-only", "ac-with-air-gap"]),
    (["ac"], ["surface-discharge"], ["common", "ac-only", "surface-discharge-only"]),
    (["ac", "dc"], ["air-gap"], ["common", "ac-only", "dc-or-transistorised",
                                 "ac-with-air-gap"]),
])
def test_steps_for_selects_by_exciter_and_plug_type(exciters, plugs, expected):
    procedure = parse_procedure(procedure_text(BY_TYPE), FILE)
    assert [s.id for s in procedure.steps_for(exciters, plugs)] == expected


def test_applies_to_by_engine_model():
    procedure = parse_procedure(procedure_text(), FILE)
    assert procedure.applies_to("QT-610", ["dc"], ["air-gap"])
    assert not procedure.applies_to("QT-620", ["dc"], ["air-gap"])


def test_applies_to_by_installed_types():
    text = procedure_text().replace("exciter_types: [dc, transistorised, ac]",
                                    "exciter_types: [dc]")
    procedure = parse_procedure(text, FILE)
    assert procedure.applies_to("QT-610", ["dc"], ["surface-discharge"])
    assert not procedure.applies_to("QT-610", ["ac"], ["surface-discharge"])
    assert not procedure.applies_to("QT-610", ["dc", "ac"], ["air-gap"])
