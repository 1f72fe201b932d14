"""A job as the station reads it: its row, its state folded from its log, its chain head.

The one place a job's state is read, by the recording service and by the records alike;
the fold itself is the domain's (`execution.job_state`).
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from dataclasses import dataclass
from typing import Any

from sqlite_utils import Database

from ..domain.execution import JobState, job_state
from ..domain.procedure_files import procedure_of_revision
from . import jobs, procedures


class NotFound(LookupError):
    """A job, engine or procedure that does not exist (answered 404)."""


@dataclass(frozen=True)
class Job:
    row: dict[str, Any]
    state: JobState
    head: dict[str, Any]  # the job's latest event: seq and hash


class _StateCache:
    """Job states by the hash of their latest event.

    The hash chain makes the head hash name the whole log, so a state found
    here is exactly what rebuilding from the log would give; an event appended
    by anyone changes the head and misses the cache. Saves re-reading a long log
    on every step.
    """

    def __init__(self, size: int = 256) -> None:
        self._size = size
        self._states: OrderedDict[str, JobState] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, head_hash: str) -> JobState | None:
        with self._lock:
            state = self._states.get(head_hash)
            if state is not None:
                self._states.move_to_end(head_hash)
            return state

    def put(self, head_hash: str, state: JobState) -> None:
        with self._lock:
            self._states[head_hash] = state
            self._states.move_to_end(head_hash)
            while len(self._states) > self._size:
                self._states.popitem(last=False)


_STATES = _StateCache()


def remember(head_hash: str, state: JobState) -> None:
    """Keep a state just committed under its new head (call only after the commit)."""
    _STATES.put(head_hash, state)


def procedure_of_job(db: Database, row: dict[str, Any]) -> Any:
    revision = procedures.revision(db, row["revision_hash"])
    assert revision is not None  # a foreign key keeps it
    return procedure_of_revision(revision["hash"], revision["content"])


def load_job(db: Database, job_id: int) -> Job:
    """A job's row and state (rebuilt from its log unless the same log was seen before)."""
    row = jobs.job(db, job_id)
    if row is None:
        raise NotFound(f"job {job_id} does not exist")
    head = jobs.chain_head(db, job_id)
    assert head is not None  # every job starts with job_opened
    state = _STATES.get(head["hash"])
    if state is None:
        state = job_state(procedure_of_job(db, row), jobs.events(db, job_id))
        _STATES.put(head["hash"], state)
    return Job(row, state, head)
