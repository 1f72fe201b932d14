"""Times, people and the dated entry, as every section of the work record writes them."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime

from ..domain.execution import JobState
from ..domain.procedures import Step
from ..store import Database, people

# --- time and people, as the record writes them -----------------------------------------

def station_time(moment: str | datetime | None, seconds: bool = True) -> str:
    """A time as the record prints it: the station's clock in UTC, with the zone written.

    A naive time is taken to be UTC already (the station stores nothing else).
    """
    if moment is None or moment == "":
        return "—"
    when = datetime.fromisoformat(moment) if isinstance(moment, str) else moment
    when = when.replace(tzinfo=UTC) if when.tzinfo is None else when.astimezone(UTC)
    return when.strftime("%Y-%m-%d %H:%M:%S UTC" if seconds else "%Y-%m-%d %H:%M UTC")


@dataclass(frozen=True)
class Who:
    """A person as the record names them: printed name and authorisation number."""

    name: str
    authorisation: str | None

    @property
    def text(self) -> str:
        return f"{self.name} ({self.authorisation or 'no authorisation number'})"


class People:
    """Looks people up once per record."""

    def __init__(self, db: Database) -> None:
        self._db = db
        self._by_id: dict[int, Who] = {}

    def __call__(self, person_id: int | None) -> Who | None:
        if person_id is None:
            return None
        if person_id not in self._by_id:
            found = people.person_by_id(self._db, person_id)
            self._by_id[person_id] = (Who(found.full_name, found.authorisation) if found
                                      else Who(f"unknown person {person_id}", None))
        return self._by_id[person_id]

    def by_username(self, username: str) -> Who:
        found = people.person_by_username(self._db, username.strip())
        return (Who(found.full_name, found.authorisation) if found
                else Who(f"'{username}' (not enrolled)", None))


# --- the dated line every section prints, and the step it is for ----------------------

@dataclass(frozen=True)
class Entry:
    """A dated line of the record: a power change, an ignition switch, a tool, a part."""

    what: str
    by: Who | None
    at: str
    step_number: int | None = None
    detail: str = ""


@dataclass(frozen=True)
class AmendmentLine:
    """A correction after certification: the step and field, the value recorded and the
    corrected one side by side, why, who and when."""

    step_number: int | None
    step: str
    field: str
    recorded: str
    corrected: str
    why: str
    by: Who | None
    at: str


def step_of(state: JobState, step_id: str) -> Step | None:
    """The job's applicable step with this id, or None when it has no such step."""
    position = state.positions.get(step_id)
    return state.applicable[position] if position is not None else None
