"""Shop procedures: the typed model of a procedure and its steps, and its effectivity.

Reading a procedure file (YAML), its content hash and the checks of a well-made
procedure live in `procedure_files`.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from typing import Annotated, Literal

from pydantic import AfterValidator, BaseModel, ConfigDict, Field, model_validator
from pydantic_core import PydanticCustomError

from .units import UnitProblem, parse_quantity, parse_unit

STEP_KINDS = (
    "note", "caution", "warning", "check", "lockout", "discharge_wait",
    "reading", "spark_count", "ignition_run", "torque", "part", "sign",
)
# What a check step can disconnect and reconnect on its channel: the exciter's low-voltage
# input, and the high-tension lead at either end (two jobs may each have one end open).
Connection = Literal["input", "lead_at_exciter", "lead_at_plug"]
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
    # What ticking it does to the engine's channel: a connection opened (the channel is not
    # whole until some job restores it) or put back.
    disturbs: list[Connection] = Field(default_factory=list)
    restores: list[Connection] = Field(default_factory=list)


class Breaker(_Strict):
    id: Text
    label: Text


class Lockout(_Step):
    """Hang a tag on each listed breaker (apply), or take them off (release). A release step
    may name the shop's documented absent-owner procedure; without it only owners untag.
    An apply step with `confirm_existing` is met by tags found hanging: writing a hanging
    tag's number confirms it instead of being refused as a number in use."""

    kind: Literal["lockout"]
    breakers: list[Breaker] = Field(min_length=1)
    action: Literal["apply", "release"] = "apply"
    absent_owner: Text | None = None
    confirm_existing: bool = False

    @model_validator(mode="after")
    def _absent_owner_only_on_release(self) -> Lockout:
        if self.absent_owner is not None and self.action != "release":
            raise _field_error("absent_owner", "an absent-owner path belongs on a release step")
        if self.confirm_existing and self.action != "apply":
            raise _field_error("confirm_existing", "confirming tags found hanging belongs on "
                               "an apply step")
        return self


class Capacitor(_Strict):
    """The exciter's storage circuit, when the approved data gives it."""

    capacitance: Capacitance
    charge_voltage: Voltage
    bleed_resistance: Resistance
    safe_voltage: Voltage


class DischargeWait(_Step):
    """The wait after the exciter's input is disconnected. `minimum_reason` says why the
    approved data allows a minimum shorter than the station's floor (see procedure_sanity)."""

    kind: Literal["discharge_wait"]
    minimum: Duration
    minimum_reason: Text | None = None
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
    # The test voltage the approved data sets (insulation resistance): a reading taken at
    # another is refused.
    test_voltage: Voltage | None = None

    @model_validator(mode="after")
    def _number_has_unit_and_limits(self) -> Reading:
        if self.value == "number":
            if self.unit is None:
                raise _field_error("unit", "a number reading needs its unit")
            if self.limits is None:
                raise _field_error("limits", "a number reading needs its limits "
                                   "(min, max or both)")
        if self.test_voltage is not None and "test_voltage" not in self.conditions:
            raise _field_error("test_voltage", "a required test voltage needs the reading to "
                               "record its test voltage: add test_voltage to conditions")
        return self


class SupplyLimits(_Strict):
    """The exciter supply a count is valid at, as the approved data gives it (volts; hertz
    for an AC supply). Absent, the station's defaults for a 28 V DC or 115 V 400 Hz bus."""

    dc_volts: Limits | None = None
    ac_volts: Limits | None = None
    ac_hertz: Limits | None = None


class SparkCount(_Step):
    kind: Literal["spark_count"]
    channel: Literal["A", "B", "both"]
    window: Duration = "30 s"
    limits: Limits
    both_tolerance: float | None = Field(default=None, ge=0)
    supply: SupplyLimits | None = None


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


class PartChange(_Step):
    """A part taken off (`remove`) or put on (`install`) in the job's channel, recorded as
    typed fields: part and serial numbers; for a removed part its status, reason and tag;
    for a fitted one its release certificate and condition; and the engine's usage then.
    The station checks them against what the engine has fitted and what the position may
    take."""

    kind: Literal["part"]
    action: Literal["remove", "install"]
    part: Literal["exciter", "lead", "plug"]


class Sign(_Step):
    kind: Literal["sign"]
    role: Literal["performer", "inspector", "certifying"]


Step = Annotated[
    Advisory | Check | Lockout | DischargeWait | Reading | SparkCount | IgnitionRun | Torque
    | PartChange | Sign,
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
