"""What a sign screen offers: the PIN box only when the person may give the signature.

Only presentation: the reason comes from webapp.domain.signoff, the same rule the station
applies when the signature arrives.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

from .. import store
from ..domain.authorisations import Authorisation, authorisation_for
from ..domain.errors import RuleRefusal
from ..domain.execution import JobState, StepProgress
from ..domain.procedures import Sign
from ..domain.signoff import signature_refusal
from ..store import authorisations
from ..store.people import Person


@dataclass(frozen=True)
class SignView:
    refusal: str | None               # why this person cannot sign here (None: they can)
    under: Authorisation | None       # the authorisation the signature would rest on


def sign_view(db: store.Database, state: JobState, target: StepProgress | None,
              person: Person, today: date) -> SignView | None:
    """For a sign step: whether this person may sign it now, and under which authorisation."""
    if target is None or not isinstance(target.step, Sign):
        return None
    held = authorisations.held_by(db, person.id)
    refusal = signature_refusal(state, target, person.id, person.roles, held, today)
    if refusal is not None:
        return SignView(refusal, None)
    try:
        under = authorisation_for(held, target.step.role, state.procedure.ata,
                                  state.procedure.kind, today)
    except RuleRefusal as refused:  # not reached: the refusal above covers it
        return SignView(refused.reason, None)
    return SignView(None, under)
