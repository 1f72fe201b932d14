"""The work record's release statement (section 9): released to service, or why not.

Once the job is certified, the statement is the one the certifying signature gave (stored
with it). Before that, the record prints what a certification would state as the engine
stands at printing, marked as such: the certifier's stamp then says what was given.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..domain.execution import JobState
from ..domain.procedures import Sign
from ..domain.release import ReleaseStatement, passed_channel_checks, release_statement
from ..store import Database, engines


@dataclass(frozen=True)
class ReleaseLines:
    statement: ReleaseStatement
    given: bool          # True: as the certifying signature gave it; False: as it stands


def release_lines(db: Database, engine_id: int, job_id: int, state: JobState,
                  work: str) -> ReleaseLines | None:
    """None when the procedure has no certifying signature."""
    certifying = [s for s in state.applicable if isinstance(s, Sign) and s.role == "certifying"]
    if not certifying:
        return None
    signed = state.completed.get(certifying[-1].id)
    if signed is not None and "release" in signed.get("data", {}):
        return ReleaseLines(ReleaseStatement.from_data(signed["data"]["release"]), True)
    effects = passed_channel_checks(state.procedure.kind, state.readings)
    return ReleaseLines(release_statement(engines.current(db, engine_id), work, job_id,
                                          effects), False)
