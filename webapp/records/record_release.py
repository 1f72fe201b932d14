"""The work record's release statement (section 9): released to service, or why not.

Once the job is certified, the statement is the one the certifying signature gave (stored
with it). Before that, the record prints what a certification would state as the engine
stands at printing, marked as such: the certifier's stamp then says what was given.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..domain.execution import JobState
from ..domain.procedures import Sign
from ..domain.release import ReleaseStatement, given_release, job_statement
from ..store import Database, engines


@dataclass(frozen=True)
class ReleaseLines:
    statement: ReleaseStatement
    given: bool          # True: as the certifying signature gave it; False: as it stands


def release_lines(db: Database, engine_id: int, job_id: int,
                  state: JobState) -> ReleaseLines | None:
    """None when the procedure has no certifying signature."""
    if not any(isinstance(s, Sign) and s.role == "certifying" for s in state.applicable):
        return None
    given = given_release(state)
    if given is not None:
        return ReleaseLines(given, True)
    return ReleaseLines(job_statement(state, engines.current(db, engine_id), job_id)[0], False)
