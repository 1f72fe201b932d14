"""Procedure files: parsing the YAML a trainer writes, and every problem located.

A procedure file is parsed from text (the caller reads the file), checked against the
typed models of `procedures`, then against the rules of a well-made procedure (unique
step ids, WARNING/CAUTION/NOTE before the step they guard, in that order, a wait after
the step that starts its clock) and against the data checks of `procedure_sanity` (a
discharge wait no shorter than the bleed-down, a rest after every on-period). Every
problem is reported at once, with file, step number, step id and field.
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterator
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import yaml
from pydantic import ValidationError

from .isolation import structure_problems
from .procedure_sanity import data_problems
from .procedures import (
    ADVISORY_KINDS,
    STEP_KINDS,
    Advisory,
    Check,
    DischargeWait,
    IgnitionRun,
    PartChange,
    Procedure,
    Step,
    StepCondition,
    guarded_step,
)

# --- parsing and problems -----------------------------------------------------------------

@dataclass(frozen=True)
class ProcedureProblem:
    """One thing wrong with a procedure file, located for the trainer who fixes it."""

    file: str
    message: str
    step_number: int | None = None
    step_id: str | None = None
    field: str | None = None

    def __str__(self) -> str:
        where = [self.file]
        if self.step_number is not None:
            named = f" ({self.step_id})" if self.step_id else ""
            where.append(f"step {self.step_number}{named}")
        if self.field:
            where.append(f"field '{self.field}'")
        return ": ".join([", ".join(where), self.message])


class ProcedureInvalid(Exception):
    def __init__(self, problems: list[ProcedureProblem]) -> None:
        super().__init__("\n".join(str(p) for p in problems))
        self.problems = problems


def content_hash(text: str) -> str:
    """SHA-256 of a procedure's text, line endings normalised: a revision's identity."""
    return hashlib.sha256(normalise_text(text).encode("utf-8")).hexdigest()


def normalise_text(text: str) -> str:
    return text.replace("\r\n", "\n").replace("\r", "\n")


def parse_procedure(text: str, file: str = "<procedure>", check_data: bool = True) -> Procedure:
    """Parse and validate a procedure's YAML text; raise ProcedureInvalid with every problem.

    `check_data=False` skips the data sanity rules (`procedure_sanity`): for re-reading a
    revision approved and stored already, which a job may have pinned under earlier rules
    and must still be readable; every file loaded or checked is held to them."""
    try:
        raw = yaml.load(text, Loader=_loader())
    except yaml.YAMLError as err:
        mark = getattr(err, "problem_mark", None)
        line = f" at line {mark.line + 1}" if mark is not None else ""
        raise ProcedureInvalid([ProcedureProblem(file, f"not valid YAML{line}: "
                                                 f"{getattr(err, 'problem', err)}")]) from None
    if not isinstance(raw, dict):
        raise ProcedureInvalid([ProcedureProblem(file, "a procedure is a mapping of fields "
                                                 "(id, title, steps, ...)")])
    problems = list(_duplicate_ids(raw, file))
    try:
        procedure = Procedure.model_validate(raw)
    except ValidationError as err:
        problems.extend(_structural_problems(err, raw, file))
        raise ProcedureInvalid(problems) from None
    problems.extend(_order_problems(procedure, file))
    problems.extend(_gate_problems(procedure, file))
    if check_data:
        # The energy-control structure (isolation check, grounding) joined these rules later:
        # a stored revision that a job pinned before them stays readable; the station's
        # rules (`isolation`) still hold its steps.
        problems.extend(ProcedureProblem(file, *found) for found in data_problems(procedure))
        problems.extend(ProcedureProblem(file, *found)
                        for found in structure_problems(procedure))
    if problems:
        raise ProcedureInvalid(problems)
    return procedure


class _UniqueKeyLoader(getattr(yaml, "CSafeLoader", yaml.SafeLoader)):  # type: ignore[misc]
    """Safe YAML that refuses a key given twice (a silent overwrite loses a trainer's text)."""

    def construct_mapping(self, node: yaml.MappingNode, deep: bool = False) -> dict:
        seen = set()
        for key_node, _ in node.value:
            key = self.construct_object(key_node, deep=deep)
            if key in seen:
                raise yaml.constructor.ConstructorError(
                    None, None, f"the key '{key}' is given twice", key_node.start_mark)
            seen.add(key)
        return super().construct_mapping(node, deep=deep)


def _loader() -> type:
    return _UniqueKeyLoader


def _raw_steps(raw: dict[str, Any]) -> list[Any]:
    steps = raw.get("steps")
    return steps if isinstance(steps, list) else []


def _step_id(raw_step: Any) -> str | None:
    return raw_step.get("id") if isinstance(raw_step, dict) and isinstance(
        raw_step.get("id"), str) else None


def _duplicate_ids(raw: dict[str, Any], file: str) -> Iterator[ProcedureProblem]:
    seen: dict[str, int] = {}
    for number, step in enumerate(_raw_steps(raw), start=1):
        step_id = _step_id(step)
        if step_id is None:
            continue
        if step_id in seen:
            yield ProcedureProblem(file, f"duplicate step id: step {seen[step_id]} already "
                                   f"uses '{step_id}'", number, step_id, "id")
        else:
            seen[step_id] = number


_MESSAGES = {
    "missing": "is required",
    "extra_forbidden": "is not a field of this step kind (check the spelling)",
    "union_tag_invalid": "unknown step kind '{tag}'; known kinds: " + ", ".join(STEP_KINDS),
    "union_tag_not_found": "every step needs a kind; known kinds: " + ", ".join(STEP_KINDS),
}


def _structural_problems(err: ValidationError, raw: dict[str, Any],
                         file: str) -> Iterator[ProcedureProblem]:
    steps = _raw_steps(raw)
    for error in err.errors():
        loc = list(error["loc"])
        number = step_id = None
        if len(loc) >= 2 and loc[0] == "steps" and isinstance(loc[1], int):
            number = loc[1] + 1
            step_id = _step_id(steps[loc[1]]) if loc[1] < len(steps) else None
            loc = loc[2:]
            if loc and loc[0] in STEP_KINDS:  # the discriminator's own level
                loc = loc[1:]
            # A table-or-row field's own level ("_table", "_row") is no field to fix.
            loc = [part for part in loc if not str(part).startswith("_")]
        field = ".".join(str(part) for part in loc) or None
        template = _MESSAGES.get(error["type"])
        if template:
            message = template.format(tag=(error.get("ctx") or {}).get("tag", ""))
        else:
            message = error["msg"].removeprefix("Value error, ")
        if error["type"] in ("union_tag_invalid", "union_tag_not_found"):
            field = "kind"
        elif error["type"] == "step_field":
            field = ".".join([*(str(p) for p in loc), error["ctx"]["field"]])
        yield ProcedureProblem(file, message, number, step_id, field)


def _order_problems(procedure: Procedure, file: str) -> Iterator[ProcedureProblem]:
    """WARNING/CAUTION/NOTE stand before the step they guard, warnings first."""
    index = {step.id: number for number, step in enumerate(procedure.steps, start=1)}
    steps = procedure.steps
    for number, step in enumerate(steps, start=1):
        if not isinstance(step, Advisory):
            continue
        target = guarded_step(steps, number - 1)
        if step.guards is not None and step.guards not in index:
            yield ProcedureProblem(file, f"guards '{step.guards}', which is not a step of this "
                                   "procedure", number, step.id, "guards")
            continue
        if target is None:
            yield ProcedureProblem(file, f"a {step.kind.upper()} must stand before the step it "
                                   "guards, but no step follows it", number, step.id, "guards")
            continue
        if index[target.id] <= number:
            yield ProcedureProblem(file, f"a {step.kind.upper()} must stand before the step it "
                                   f"guards, but '{target.id}' is step {index[target.id]}",
                                   number, step.id, "guards")
        elif (target.when is not None and step.when != target.when
              and not _alternatives_cover(procedure, step, target)):
            yield ProcedureProblem(file, f"guards '{target.id}', which applies only 'when' "
                                   f"{_when_text(target.when)}: give this {step.kind.upper()} "
                                   "the same 'when'", number, step.id, "when")
    # Within a run of advisories: warnings, then cautions, then notes.
    run: list[tuple[int, Advisory]] = []
    for number, entry in enumerate([*steps, None], start=1):
        if isinstance(entry, Advisory):
            run.append((number, entry))
            continue
        for (_, earlier), (later_number, later) in zip(run, run[1:], strict=False):
            if ADVISORY_KINDS.index(later.kind) < ADVISORY_KINDS.index(earlier.kind):
                yield ProcedureProblem(file, f"a {later.kind.upper()} must come before a "
                                       f"{earlier.kind.upper()} that guards the same step",
                                       later_number, later.id, "kind")
        run = []


def _alternatives_cover(procedure: Procedure, advisory: Advisory, target: Step) -> bool:
    """Whether the steps of the target's kind standing right after it are alternatives by
    exciter type (a count for single-mode units, a count per mode of combination units)
    that together cover every exciter type the advisory applies to: in each configuration
    the advisory then guards the first of them that applies."""
    steps = procedure.steps
    start = steps.index(target)
    covered: set[str] = set()
    for step in steps[start:]:
        if isinstance(step, Advisory):
            continue
        if step.kind != target.kind or step.when is None or step.when.plug_types is not None \
                or step.when.exciter_types is None:
            break
        covered |= set(step.when.exciter_types)
    wanted = (advisory.when.exciter_types if advisory.when is not None
              and advisory.when.plug_types is None else None)
    if advisory.when is not None and wanted is None:
        return False
    return set(wanted or procedure.effectivity.exciter_types) <= covered


def _gate_problems(procedure: Procedure, file: str) -> Iterator[ProcedureProblem]:
    """A wait needs the step that starts its clock; an ignition run needs its gate; a part
    changes in one channel's position."""
    power_removed = gate = False
    for number, step in enumerate(procedure.steps, start=1):
        if isinstance(step, PartChange) and procedure.channel != "one":
            yield ProcedureProblem(file, "a part is removed or installed in one channel's "
                                   "position: the procedure needs 'channel: one'", number,
                                   step.id, "kind")
        if isinstance(step, Check):
            power_removed = power_removed or step.power == "removed"
            gate = gate or step.before_energising
        elif isinstance(step, DischargeWait) and not power_removed:
            yield ProcedureProblem(file, "a discharge wait counts from the disconnection of the "
                                   "exciter's input: put a check with 'power: removed' before "
                                   "it", number, step.id, "kind")
        elif isinstance(step, IgnitionRun) and not gate:
            yield ProcedureProblem(file, "an ignition run needs the confirmations before "
                                   "energising: put a check with 'before_energising: true' "
                                   "before it", number, step.id, "kind")


def _when_text(when: StepCondition) -> str:
    parts = []
    if when.exciter_types:
        parts.append("exciter_types " + "/".join(when.exciter_types))
    if when.plug_types:
        parts.append("plug_types " + "/".join(when.plug_types))
    return " and ".join(parts)



@lru_cache(maxsize=64)
def procedure_of_revision(revision_hash: str, content: str) -> Procedure:
    """The parsed procedure of a stored revision (parsed once per process: it never changes)."""
    return parse_procedure(content, f"revision {revision_hash[:12]}", check_data=False)
