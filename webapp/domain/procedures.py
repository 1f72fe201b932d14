"""Shop procedures: the typed model of a procedure and its steps, and its effectivity.

Reading a procedure file (YAML), its content hash and the checks of a well-made
procedure live in `procedure_files`.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from typing import Annotated, Literal

from pydantic import AfterValidator, Field

from .procedure_steps import (  # noqa: F401 - re-exported: the model's one face
    Advisory,
    Breaker,
    Capacitor,
    CapacitorTable,
    Check,
    DischargeWait,
    DutyCycle,
    IgnitionRun,
    Lockout,
    OpenItemSpec,
    PartChange,
    Reading,
    Sign,
    SparkCount,
    Step,
    SupplyLimits,
    Torque,
    TypeSupply,
)
from .procedure_types import (  # noqa: F401 - re-exported: the model's one face
    ADVISORY_KINDS,
    EXCITER_MODES,
    EXCITER_TYPES,
    PLUG_TYPES,
    PROCEDURE_KINDS,
    STEP_KINDS,
    AnyUnit,
    Capacitance,
    Connection,
    Duration,
    DutyEntry,
    Energy,
    ExciterMode,
    ExciterType,
    Id,
    Items,
    Limits,
    LimitsTable,
    PartNumber,
    PlugType,
    Resistance,
    StepCondition,
    StepLimits,
    Text,
    TorqueUnit,
    Voltage,
    _Strict,
)


class Source(_Strict):
    """The approved maintenance data this procedure follows."""

    document: Text
    section: Text
    revision: Text


class Effectivity(_Strict):
    engine_models: list[Text] = Field(min_length=1)
    exciter_types: list[ExciterType] = Field(min_length=1)
    plug_types: list[PlugType] = Field(min_length=1)



class Preliminary(_Strict):
    """Preliminary requirements; each list may be the word "none"."""

    conditions: Items
    tools: Items
    supplies: Items
    spares: Items
    safety: Items



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
