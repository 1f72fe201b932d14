"""The building blocks of a procedure's model: kinds, names, quantities with units, limits
and the condition a step applies under."""

from __future__ import annotations

from collections.abc import Iterable
from typing import Annotated, Literal

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Discriminator,
    Field,
    Tag,
    model_validator,
)
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
# "combination": one unit with a high-energy start mode and a low-energy continuous mode,
# each with its own energy rating and limits; its counts name the mode they were made in.
EXCITER_TYPES = ("dc", "transistorised", "ac", "combination")
EXCITER_MODES = {"start": "high-energy start", "continuous": "low-energy continuous"}
PLUG_TYPES = ("air-gap", "surface-discharge")
PROCEDURE_KINDS = ("removal", "installation", "inspection", "functional check")

Id = Annotated[str, Field(pattern=r"^[a-z0-9][a-z0-9-]*$", max_length=60)]
Text = Annotated[str, Field(min_length=1)]
ExciterType = Literal["dc", "transistorised", "ac", "combination"]
ExciterMode = Literal["start", "continuous"]
# An exciter part number as the parts data writes it ("XEX-1001-03").
PartNumber = Annotated[str, Field(pattern=r"^[A-Za-z0-9][A-Za-z0-9./-]*$", max_length=40)]
PlugType = Literal["air-gap", "surface-discharge"]
# The kinds of calibrated instrument a reading is taken with (see `instruments`).
InstrumentKind = Literal["torque wrench", "insulation tester", "milliohm meter", "ammeter",
                         "voltmeter", "erosion gauge", "spark counter"]
# Each kind and the dimension it reads (its range is given in); a spark counter's range is
# the longest window it times.
INSTRUMENT_KINDS: dict[str, str] = {
    "torque wrench": "torque", "insulation tester": "resistance",
    "milliohm meter": "resistance", "ammeter": "current", "voltmeter": "voltage",
    "erosion gauge": "length", "spark counter": "time",
}


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


# --- parts of a procedure -----------------------------------------------------------------

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


def _check_energy(value: str | int | float) -> str:
    """An energy rating in joules ("12 J", "2 J"): torque shares the dimension, so the unit
    itself must be a joule."""
    checked = _check_quantity(value, "energy")
    unit = str(parse_quantity(value, "energy").units)
    if not unit.endswith("joule"):
        raise ValueError(f"'{value}' must be written in joules (J)")
    return checked


Energy = Annotated[str | int | float, AfterValidator(_check_energy)]
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


class LimitsTable(_Strict):
    """Limits that vary by the fitted exciter's part number, as the approved data gives
    them: a row per part number, and the `default` row for any other."""

    default: Limits
    by_part_number: dict[PartNumber, Limits] = Field(min_length=1)


def table_or_row(value: object) -> str:
    """Which form a step's data is in: a table by part number (it has a `default`) or one
    row. The tags start with "_" so a problem's field leaves them out."""
    is_table = isinstance(value, dict) and "default" in value
    return "_table" if is_table or hasattr(value, "by_part_number") else "_row"


# A step's limits: one row, or a table by exciter part number.
StepLimits = Annotated[
    Annotated[Limits, Tag("_row")] | Annotated[LimitsTable, Tag("_table")],
    Discriminator(table_or_row),
]
