"""Shop procedures: the YAML format, its validation, content hash and effectivity.

A procedure file is parsed from text (the caller reads the file), checked
against typed models, then against the rules of a well-made procedure (unique
step ids, WARNING/CAUTION/NOTE before the step they guard, in that order).
Every problem is reported at once, with file, step number, step id and field.
"""

from __future__ import annotations

import hashlib
import re
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from functools import lru_cache
from typing import Annotated, Any, Literal

import yaml
from pydantic import AfterValidator, BaseModel, ConfigDict, Field, ValidationError, model_validator
from pydantic_core import PydanticCustomError

from .units import UnitProblem, parse_quantity, parse_unit

STEP_KINDS = (
    "note", "caution", "warning", "check", "lockout", "discharge_wait",
    "reading", "spark_count", "ignition_run", "torque", "sign",
)
ADVISORY_KINDS = ("warning", "caution", "note")  # in the order they must stand
EXCITER_TYPES = ("dc", "transistorised", "ac")
PLUG_TYPES = ("air-gap", "surface-discharge")
PROCEDURE_KINDS = ("removal", "installation", "inspection", "functional check")

Id = Annotated[str, Field(pattern=r"^[a-z0-9][a-z0-9-]*$", max_length=60)]
Text = Annotated[str, Field(min_length=1)]
ExciterType = Literal["dc", "transistorised", "ac"]
PlugType = Literal["air-gap", "surface-discharge"]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


# --- parts of a procedure -----------------------------------------------------------------

class Source(_Strict):
    """The approved maintenance data this procedure follows."""

    document: Text
    section: Text
    revision: Text


class Effectivity(_Strict):
    engine_models: list[Text] = Field(min_length=1)
    exciter_types: list[ExciterType] = Field(min_length=1)
    plug_types: list[PlugType] = Field(min_length=1)


class StepCondition(_Strict):
    """Limits a step to some configurations (the job's installed types)."""

    exciter_types: list[ExciterType] | None = Field(default=None, min_length=1)
    plug_types: list[PlugType] | None = Field(default=None, min_length=1)

    @model_validator(mode="after")
    def _says_something(self) -> StepCondition:
        if self.exciter_types is None and self.plug_types is None:
            raise ValueError("'when' needs exciter_types, plug_types or both")
        return self

    def matches(self, exciter_types: Iterable[str], plug_types: Iterable[str]) -> bool:
        """True when some installed exciter and some installed plug fit the condition."""
        if self.exciter_types is not None and not set(self.exciter_types) & set(exciter_types):
            return False
        return self.plug_types is None or bool(set(self.plug_types) & set(plug_types))


Items = list[Text] | Literal["none"]


class Preliminary(_Strict):
    """Preliminary requirements; each list may be the word "none"."""

    conditions: Items
    tools: Items
    supplies: Items
    spares: Items
    safety: Items


def _check_unit(value: str, dimension: str | None = None) -> str:
    try:
        parse_unit(value, dimension)
    except UnitProblem as problem:
        raise ValueError(str(problem)) from None
    return value


def _check_quantity(value: str | float, dimension: str) -> str:
    """A procedure's quantity ("2 min", "4 uF"): a positive number with a unit of `dimension`."""
    try:
        quantity = parse_quantity(value, dimension)
    except UnitProblem as problem:
        raise ValueError(str(problem)) from None
    if quantity.magnitude <= 0:
        raise ValueError(f"'{value}' must be more than zero")
    return str(value)


def _quantity_of(dimension: str) -> AfterValidator:
    return AfterValidator(lambda v: _check_quantity(v, dimension))


# Numbers are let through the type so the check can say "has no unit".
Duration = Annotated[str | int | float, _quantity_of("time")]
Capacitance = Annotated[str | int | float, _quantity_of("capacitance")]
Voltage = Annotated[str | int | float, _quantity_of("voltage")]
Resistance = Annotated[str | int | float, _quantity_of("resistance")]
AnyUnit = Annotated[str, AfterValidator(_check_unit)]
TorqueUnit = Annotated[str, AfterValidator(lambda v: _check_unit(v, "torque"))]


def _duty_entry(entry: str) -> str:
    state, _, duration = entry.partition(" ")
    if state not in ("on", "off"):
        raise ValueError(f"'{entry}' must start with 'on' or 'off'")
    _check_quantity(duration, "time")
    return entry


DutyEntry = Annotated[str, AfterValidator(_duty_entry)]


def _field_error(field: str, message: str) -> PydanticCustomError:
    """A whole-step check's error, naming the field the trainer must fix."""
    return PydanticCustomError("step_field", message, {"field": field})


class Limits(_Strict):
    """Limits in the step's unit; at least one bound."""

    min: float | None = None
    max: float | None = None

    @model_validator(mode="after")
    def _bounds(self) -> Limits:
        if self.min is None and self.max is None:
            raise ValueError("limits need a min, a max or both")
        if self.min is not None and self.max is not None and self.min > self.max:
            raise ValueError(f"min {self.min} is above max {self.max}")
        return self


# --- steps --------------------------------------------------------------------------------

class _Step(_Strict):
    id: Id
    text: Text
    detail: str | None = None
    when: StepCondition | None = None

    @property
    def is_advisory(self) -> bool:
        return self.kind in ADVISORY_KINDS  # type: ignore[attr-defined]


class Advisory(_Step):
    """A WARNING (people), CAUTION (equipment) or NOTE; `guards` names the step it
    applies to (by default the next step that is not itself an advisory)."""

    kind: Literal["note", "caution", "warning"]
    guards: Id | None = None


class Check(_Step):
    """An action to do and tick. `power` marks the step that disconnects (or reconnects) the
    exciter's input; `before_energising` makes it part of the gate before any ignition run;
    `ignition_off` is the selector-off step that ends an ignition run."""

    kind: Literal["check"]
    items: list[Text] | None = None
    power: Literal["removed", "restored"] | None = None
    before_energising: bool = False
    ignition_off: bool = False  # ticking it records every energised exciter switched off


class Breaker(_Strict):
    id: Text
    label: Text


class Lockout(_Step):
    """Hang a tag on each listed breaker (apply), or take them off (release). A release step
    may name the shop's documented absent-owner procedure; without it only owners untag."""

    kind: Literal["lockout"]
    breakers: list[Breaker] = Field(min_length=1)
    action: Literal["apply", "release"] = "apply"
    absent_owner: Text | None = None

    @model_validator(mode="after")
    def _absent_owner_only_on_release(self) -> Lockout:
        if self.absent_owner is not None and self.action != "release":
            raise _field_error("absent_owner", "an absent-owner path belongs on a release step")
        return self


class Capacitor(_Strict):
    """The exciter's storage circuit, when the approved data gives it."""

    capacitance: Capacitance
    charge_voltage: Voltage
    bleed_resistance: Resistance
    safe_voltage: Voltage


class DischargeWait(_Step):
    kind: Literal["discharge_wait"]
    minimum: Duration
    capacitor: Capacitor | None = None


class Reading(_Step):
    """A value to record. Number readings carry their unit and limits; `conditions` are
    recorded with the value (insulation tests); `wear: true` ties a plug's erosion to the
    plug's serial number and its usage."""

    kind: Literal["reading"]
    value: Literal["number", "text", "pass_fail"]
    unit: AnyUnit | None = None
    limits: Limits | None = None
    near_margin: float | None = Field(default=None, ge=0)
    conditions: list[Literal["test_voltage", "ambient_temperature", "humidity"]] = Field(
        default_factory=list)
    wear: bool = False

    @model_validator(mode="after")
    def _number_has_unit_and_limits(self) -> Reading:
        if self.value == "number":
            if self.unit is None:
                raise _field_error("unit", "a number reading needs its unit")
            if self.limits is None:
                raise _field_error("limits", "a number reading needs its limits "
                                   "(min, max or both)")
        return self


class SparkCount(_Step):
    kind: Literal["spark_count"]
    channel: Literal["A", "B", "both"]
    window: Duration = "30 s"
    limits: Limits
    both_tolerance: float | None = Field(default=None, ge=0)


class DutyCycle(_Strict):
    """One of: an on/off pattern, a max on-time with a mandatory off-time, or continuous."""

    pattern: list[DutyEntry] | None = Field(default=None, min_length=1)
    max_on: Duration | None = None
    min_off: Duration | None = None
    continuous: bool = False

    @model_validator(mode="after")
    def _one_way(self) -> DutyCycle:
        ways = [self.pattern is not None, self.max_on is not None, self.continuous]
        if sum(ways) != 1:
            raise ValueError("give exactly one of pattern, max_on (with min_off) or continuous")
        if (self.max_on is None) != (self.min_off is None):
            raise ValueError("max_on and min_off go together")
        return self


class IgnitionRun(_Step):
    kind: Literal["ignition_run"]
    channel: Literal["A", "B", "both"]
    duty_cycle: DutyCycle


class Torque(_Step):
    kind: Literal["torque"]
    unit: TorqueUnit
    limits: Limits
    lubricant: Text
    lubricant_factor: float | None = Field(default=None, gt=0)
    adapter: bool = False


class Sign(_Step):
    kind: Literal["sign"]
    role: Literal["performer", "inspector", "certifying"]


Step = Annotated[
    Advisory | Check | Lockout | DischargeWait | Reading | SparkCount | IgnitionRun | Torque | Sign,
    Field(discriminator="kind"),
]


def _check_ata(value: str) -> str:
    if not re.fullmatch(r"74-\d\d", value):
        raise ValueError(f"'{value}' is not an ignition chapter-section: write 74-xx "
                         "(for example 74-10)")
    return value


class Procedure(_Strict):
    id: Id
    title: Text
    ata: Annotated[str, AfterValidator(lambda v: _check_ata(v))]
    kind: Literal["removal", "installation", "inspection", "functional check"]
    channel: Literal["one", "all"]
    source: Source
    effectivity: Effectivity
    preliminary: Preliminary
    steps: list[Step] = Field(min_length=1)
    after_completion: Items

    def applies_to(self, engine_model: str, exciter_types: Iterable[str],
                   plug_types: Iterable[str]) -> bool:
        """Whether this procedure's effectivity covers an engine and its installed parts."""
        eff = self.effectivity
        return (engine_model in eff.engine_models
                and all(t in eff.exciter_types for t in exciter_types)
                and all(t in eff.plug_types for t in plug_types))

    def steps_for(self, exciter_types: Iterable[str], plug_types: Iterable[str]) -> list[Step]:
        """The steps that apply to the installed configuration, in order."""
        exciters, plugs = list(exciter_types), list(plug_types)
        return [s for s in self.steps if s.when is None or s.when.matches(exciters, plugs)]


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


def parse_procedure(text: str, file: str = "<procedure>") -> Procedure:
    """Parse and validate a procedure's YAML text; raise ProcedureInvalid with every problem."""
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
        elif target.when is not None and step.when != target.when:
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


def _gate_problems(procedure: Procedure, file: str) -> Iterator[ProcedureProblem]:
    """A wait needs the step that starts its clock; an ignition run needs its gate."""
    power_removed = gate = False
    for number, step in enumerate(procedure.steps, start=1):
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


def guarded_step(steps: list[Step], position: int) -> Step | None:
    """The step an advisory at `position` applies to (its `guards`, or the next action)."""
    step = steps[position]
    if isinstance(step, Advisory) and step.guards is not None:
        return next((s for s in steps if s.id == step.guards), None)
    return next((s for s in steps[position + 1:] if not isinstance(s, Advisory)), None)


def advisories_for(steps: list[Step], step_id: str) -> list[Advisory]:
    """The WARNING/CAUTION/NOTE steps that guard a given step, in procedure order."""
    found = []
    for position, step in enumerate(steps):
        if isinstance(step, Advisory):
            target = guarded_step(steps, position)
            if target is not None and target.id == step_id:
                found.append(step)
    return found


@lru_cache(maxsize=64)
def procedure_of_revision(revision_hash: str, content: str) -> Procedure:
    """The parsed procedure of a stored revision (parsed once per process: it never changes)."""
    return parse_procedure(content, f"revision {revision_hash[:12]}")
