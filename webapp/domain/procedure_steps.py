"""The steps of a procedure: one model per step kind, and the `Step` union the procedure
file is read into."""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import Discriminator, Field, Tag, model_validator

from .procedure_types import (
    ADVISORY_KINDS,
    INSTRUMENT_KINDS,
    AnyUnit,
    Capacitance,
    Connection,
    Duration,
    DutyEntry,
    Energy,
    ExciterMode,
    Id,
    InstrumentKind,
    Limits,
    PartNumber,
    Resistance,
    StepCondition,
    StepLimits,
    Text,
    TorqueUnit,
    Voltage,
    _field_error,
    _Strict,
)
from .units import UnitProblem, parse_unit


def _dimension(unit: str | None) -> str | None:
    """'voltage' when the unit is one of volts, else None (the unit's own check reports it)."""
    if unit is None:
        return None
    try:
        parse_unit(unit, "voltage")
    except UnitProblem:
        return None
    return "voltage"


def _instrument_fits(kind: str, unit: str) -> None:
    try:
        parse_unit(unit, INSTRUMENT_KINDS[kind])
    except UnitProblem:
        raise _field_error("instrument", f"a {kind} does not read {unit}") from None


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


class OpenItemSpec(_Strict):
    """Work a step leaves for later, outside the job: it stays an open item on the engine (a
    limitation of any release) until the job that does it closes it."""

    text: Text
    limit: Text


class Check(_Step):
    """An action to do and tick. `power` marks the step that disconnects (or reconnects) the
    exciter's input; `before_energising` makes it part of the gate before any ignition run;
    `ignition_off` is the selector-off step that ends an ignition run. `grounds_lead` records
    the high-tension lead grounded with the insulated probe (its time starts the window in
    which the lead and exciter may be handled, see `isolation`); `handles_lead` marks a step
    that handles the exciter or lead without changing a connection; `opens_item` leaves an
    open item on the engine."""

    kind: Literal["check"]
    items: list[Text] | None = None
    power: Literal["removed", "restored"] | None = None
    before_energising: bool = False
    ignition_off: bool = False  # ticking it records every energised exciter switched off
    # What ticking it does to the engine's channel: a connection opened (the channel is not
    # whole until some job restores it) or put back.
    disturbs: list[Connection] = Field(default_factory=list)
    restores: list[Connection] = Field(default_factory=list)
    grounds_lead: bool = False
    handles_lead: bool = False
    opens_item: OpenItemSpec | None = None


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


class CapacitorTable(_Strict):
    """Capacitor data that varies by the fitted exciter's part number: a row per part
    number, and the `default` row for any other."""

    default: Capacitor
    by_part_number: dict[PartNumber, Capacitor] = Field(min_length=1)


def _capacitor_form(value: object) -> str:
    is_table = isinstance(value, dict) and "default" in value
    return "_table" if is_table or isinstance(value, CapacitorTable) else "_row"


CapacitorData = Annotated[
    Annotated[Capacitor, Tag("_row")] | Annotated[CapacitorTable, Tag("_table")],
    Discriminator(_capacitor_form),
]


class DischargeWait(_Step):
    """The wait after the exciter's input is disconnected. `minimum_reason` says why the
    approved data allows a minimum shorter than the station's floor (see procedure_sanity)."""

    kind: Literal["discharge_wait"]
    minimum: Duration
    minimum_reason: Text | None = None
    capacitor: CapacitorData | None = None


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
    # `isolation`: the check after a lockout that the energy is really off (29 CFR
    # 1910.147(d)(6)): a voltage at the input pins, or pass/fail "no snap with the selector
    # on". Work that disturbs a connection or handles a part waits for it (see `isolation`).
    verifies: Literal["isolation"] | None = None
    # The kind of calibrated instrument the reading is taken with: the mechanic names one
    # from the station's register, which must be of this kind (see `instruments`).
    instrument: InstrumentKind | None = None

    @model_validator(mode="after")
    def _number_has_unit_and_limits(self) -> Reading:
        if self.value == "number":
            if self.unit is None:
                raise _field_error("unit", "a number reading needs its unit")
            if self.limits is None:
                raise _field_error("limits", "a number reading needs its limits "
                                   "(min, max or both)")
        if self.verifies == "isolation":
            if self.value == "text":
                raise _field_error("value", "an isolation check is a number (volts at the "
                                   "input pins) or pass_fail, not text")
            if self.value == "number" and (self.limits is None or self.limits.max is None
                                           or _dimension(self.unit) != "voltage"):
                raise _field_error("limits", "an isolation check by voltage needs a unit of "
                                   "volts and a max (the most a dead circuit may read)")
        if self.instrument is not None and self.value == "text":
            raise _field_error("instrument", "a text reading is written, not taken with an "
                               "instrument")
        if self.instrument is not None and self.unit is not None:
            _instrument_fits(self.instrument, self.unit)
        if self.test_voltage is not None and "test_voltage" not in self.conditions:
            raise _field_error("test_voltage", "a required test voltage needs the reading to "
                               "record its test voltage: add test_voltage to conditions")
        return self


class TypeSupply(_Strict):
    """One exciter type's supply limits: volts, and hertz for an AC supply."""

    volts: Limits
    hertz: Limits | None = None


class SupplyLimits(_Strict):
    """The exciter supply a count is valid at, as the approved data gives it (volts; hertz
    for an AC supply): for every type (`dc_volts`, `ac_volts`, `ac_hertz`) or per exciter
    type (`dc` for DC trembler units, whose rate follows the supply voltage;
    `transistorised`; `combination`; `ac`), the per-type entry first. Absent, the station's
    defaults for a 28 V DC or 115 V 400 Hz bus."""

    dc_volts: Limits | None = None
    ac_volts: Limits | None = None
    ac_hertz: Limits | None = None
    dc: TypeSupply | None = None
    transistorised: TypeSupply | None = None
    combination: TypeSupply | None = None
    ac: TypeSupply | None = None

    @model_validator(mode="after")
    def _hertz_only_for_ac(self) -> SupplyLimits:
        for name in ("dc", "transistorised", "combination"):
            entry = getattr(self, name)
            if entry is not None and entry.hertz is not None:
                raise _field_error(f"{name}.hertz", "a DC-supplied exciter has no supply "
                                   "frequency: give hertz only under ac")
        return self


class SparkCount(_Step):
    """A spark count on a channel (or both). `limits` may be a table by exciter part number.
    `mode` is the mode of a combination unit the count is made in (start or continuous),
    with that mode's `rated_energy` from the parts data; a step with a mode is for
    combination units only."""

    kind: Literal["spark_count"]
    channel: Literal["A", "B", "both"]
    window: Duration = "30 s"
    limits: StepLimits
    both_tolerance: float | None = Field(default=None, ge=0)
    supply: SupplyLimits | None = None
    mode: ExciterMode | None = None
    rated_energy: Energy | None = None
    instrument: Literal["spark counter"] | None = None  # times the window

    @model_validator(mode="after")
    def _mode_belongs_to_combination_units(self) -> SparkCount:
        if self.mode is None:
            if self.rated_energy is not None:
                raise _field_error("rated_energy", "an energy rating belongs to a mode: give "
                                   "the step's mode too")
            return self
        types = self.when.exciter_types if self.when is not None else None
        if types != ["combination"]:
            raise _field_error("when", "a count in a mode is for combination units only: "
                               "give it when: exciter_types: [combination]")
        return self


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
    """A torque to apply and record. `fasteners` names each fastener the step torques (each
    gets its own reading and verdict); `adapter` lets the wrench work through a crowfoot or
    extension at an angle, `adapter_in_line` where the data allows it only in line."""

    kind: Literal["torque"]
    unit: TorqueUnit
    limits: Limits
    lubricant: Text
    lubricant_factor: float | None = Field(default=None, gt=0)
    adapter: bool = False
    adapter_in_line: bool = False
    fasteners: list[Text] = Field(default_factory=list, max_length=24)

    @model_validator(mode="after")
    def _fasteners_and_adapter(self) -> Torque:
        if len(set(self.fasteners)) != len(self.fasteners):
            raise _field_error("fasteners", "each fastener needs its own name")
        if len(self.fasteners) == 1:
            raise _field_error("fasteners", "name two fasteners or more, or leave the list "
                               "out for one")
        if self.adapter_in_line and not self.adapter:
            raise _field_error("adapter_in_line", "an in-line adapter needs adapter: true")
        return self


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

