"""The queue writers join before SQLite's own write lock, in one process and across the
station's worker processes.

SQLite's busy handler waits for a held write lock by sleeping in growing steps (up to
100 ms) rather than being woken, so under many tablets' writes the waiters, not the
writes, made the slow answers (bench/load.py). Writers in one process queue on a
re-entrant lock; the one at its head then takes an exclusive `flock` on a file beside the
database, which the kernel hands to the next process the moment it is let go (and drops
if its holder dies, even by kill -9). A process that does not take it (an older station,
the sqlite3 shell) still meets SQLite's busy timeout as before.
"""

from __future__ import annotations

import fcntl
import os
import threading
from pathlib import Path
from types import TracebackType

LOCK_SUFFIX = ".writer-lock"


class WriterLock:
    """Re-entrant in one thread (a nested `writing` still fails as SQLite makes it fail,
    instead of waiting on itself); exclusive across threads and processes."""

    def __init__(self, database_file: str | None) -> None:
        self._threads = threading.RLock()
        self._file = None if database_file is None else database_file + LOCK_SUFFIX
        self._fd: int | None = None
        self._pid = 0
        self._depth = 0

    def _descriptor(self) -> int:
        # A descriptor inherited through fork shares its lock with the parent: each
        # process opens the file for itself.
        if self._fd is None or self._pid != os.getpid():
            assert self._file is not None
            self._fd = os.open(self._file, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC, 0o600)
            self._pid = os.getpid()
        return self._fd

    def __enter__(self) -> WriterLock:
        self._threads.acquire()
        if self._depth == 0 and self._file is not None:
            try:
                fcntl.flock(self._descriptor(), fcntl.LOCK_EX)  # waits without the GIL
            except BaseException:
                self._threads.release()
                raise
        self._depth += 1
        return self

    def __exit__(self, kind: type[BaseException] | None, error: BaseException | None,
                 trace: TracebackType | None) -> None:
        self._depth -= 1
        if self._depth == 0 and self._fd is not None and self._pid == os.getpid():
            fcntl.flock(self._fd, fcntl.LOCK_UN)
        self._threads.release()


# One lock per database file per process, shared by all its connections.
_LOCKS: dict[str, WriterLock] = {}
_GUARD = threading.Lock()


def writer_lock(path: str | Path) -> WriterLock:
    """The writer lock of the database at `path` (":memory:" gets one with no file)."""
    key = str(path) if str(path) in ("", ":memory:") else str(Path(path).resolve())
    with _GUARD:
        if key not in _LOCKS:
            _LOCKS[key] = WriterLock(None if key in ("", ":memory:") else key)
        return _LOCKS[key]


def _forget_after_fork() -> None:
    """A forked worker starts with no lock held: the parent's may have been mid-write."""
    global _GUARD
    _LOCKS.clear()
    _GUARD = threading.Lock()


os.register_at_fork(after_in_child=_forget_after_fork)
