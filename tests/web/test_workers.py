"""The HTTP station in several worker processes: they share the per-address count and the
writer queue, one that dies is replaced, and none outlives the station (real processes)."""

from __future__ import annotations

import multiprocessing
import os
import signal
import sqlite3
import time
from pathlib import Path

import pytest

from tests.station_process import healthz, serving
from webapp import store
from webapp.serving.limits import SharedAddressCount

FORK = multiprocessing.get_context("fork")


def _workers(pid: int) -> set[int]:
    """The processes whose parent is `pid` (Linux /proc/<n>/stat, field 4)."""
    found = set()
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            if stat.read_text().rsplit(")", 1)[1].split()[1] == str(pid):
                found.add(int(stat.parent.name))
        except OSError:
            continue
    return found


def _until(condition, seconds: float, what: str):
    deadline = time.monotonic() + seconds
    while not (value := condition()):
        assert time.monotonic() < deadline, f"not within {seconds} s: {what}"
        time.sleep(0.05)
    return value


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    stat = Path(f"/proc/{pid}/stat")
    return stat.exists() and stat.read_text().rsplit(")", 1)[1].split()[0] != "Z"


def _hold_the_write(db_path: str, holding, release) -> None:
    """In another process: take the writer's turn and keep it until told."""
    db = store.connect(db_path)
    db.conn.execute("PRAGMA busy_timeout = 0")
    with store.writing(db):
        db.conn.execute("create table turn_test (who text)")
        db.conn.execute("insert into turn_test values ('other process')")
        holding.set()
        release.wait(10)
    db.close()


def test_writers_in_two_processes_take_turns_instead_of_meeting_a_busy_database(db_path):
    # With SQLite's busy timeout at 0, a second process meeting the held write lock fails
    # at once ("database is locked"); the station's writer queue makes it wait its turn.
    holding, release = FORK.Event(), FORK.Event()
    other = FORK.Process(target=_hold_the_write, args=(str(db_path), holding, release))
    other.start()
    db = store.connect(db_path)
    db.conn.execute("PRAGMA busy_timeout = 0")
    try:
        assert holding.wait(10)
        FORK.Process(target=lambda: (time.sleep(0.3), release.set())).start()
        started = time.monotonic()
        with store.writing(db):
            waited = time.monotonic() - started
            db.conn.execute("insert into turn_test values ('this process')")
        assert waited >= 0.25  # it waited for the other process, not for nothing
        rows = [r[0] for r in db.conn.execute("select who from turn_test order by rowid")]
        assert rows == ["other process", "this process"]
    finally:
        release.set()
        other.join(10)
        db.close()
    assert other.exitcode == 0


def test_without_the_queue_the_second_process_would_have_failed(db_path):
    # The check above can fail: a plain BEGIN IMMEDIATE from outside the queue, while the
    # other process holds the write, is refused by SQLite.
    holding, release = FORK.Event(), FORK.Event()
    other = FORK.Process(target=_hold_the_write, args=(str(db_path), holding, release))
    other.start()
    raw = sqlite3.connect(str(db_path), timeout=0)
    try:
        assert holding.wait(10)
        with pytest.raises(sqlite3.OperationalError, match="locked"):
            raw.execute("BEGIN IMMEDIATE")
    finally:
        release.set()
        other.join(10)
        raw.close()


def _admit(count: SharedAddressCount, times: int, answers) -> None:
    answers.put([count.admit("10.0.0.7") for _ in range(times)])


def test_the_per_address_count_is_one_count_across_worker_processes():
    count = SharedAddressCount(3)
    answers = FORK.Queue()
    worker = FORK.Process(target=_admit, args=(count, 2, answers))
    worker.start()
    assert answers.get(timeout=10) == [True, True]
    worker.join(10)
    # This process sees the two the other one admitted: one more, then no more.
    assert [count.admit("10.0.0.7") for _ in range(2)] == [True, False]
    assert count.admit("10.0.0.8")  # another address has its own count
    count.release("10.0.0.7")
    assert count.admit("10.0.0.7")


def test_the_station_serves_from_its_workers_and_replaces_one_that_dies(db_path, tmp_path):
    with serving(db_path, tmp_path, {"SERVER_WORKERS": 2}) as (port, server):
        workers = _until(lambda: _workers(server.pid) if len(_workers(server.pid)) == 2
                         else None, 10, "two workers")
        assert healthz(port, "127.0.0.2")["status"] == "ok"
        log = tmp_path / "serve.log"
        assert "Limits: 2 worker processes of 32 threads" in log.read_text()

        victim = min(workers)
        os.kill(victim, signal.SIGKILL)
        replaced = _until(lambda: (_workers(server.pid) - {victim})
                          if len(_workers(server.pid) - {victim}) == 2 else None,
                          10, "a new worker in place of the killed one")
        assert victim not in replaced
        assert "ended (signal SIGKILL); starting it again" in log.read_text()
        for _ in range(10):  # connections reach live workers only
            assert healthz(port, "127.0.0.3")["status"] == "ok"

        server.terminate()  # Ctrl+C or a service manager's stop: all of them stop
        server.wait(timeout=15)
        _until(lambda: not any(_alive(pid) for pid in replaced), 15, "workers stopped")


def test_workers_do_not_outlive_a_station_killed_outright(db_path, tmp_path):
    with serving(db_path, tmp_path, {"SERVER_WORKERS": 2}) as (port, server):
        workers = _until(lambda: _workers(server.pid) if len(_workers(server.pid)) == 2
                         else None, 10, "two workers")
        os.kill(server.pid, signal.SIGKILL)
        server.wait(timeout=10)
        # Each worker asked Linux for SIGTERM when its parent dies; none keeps the port.
        _until(lambda: not any(_alive(pid) for pid in workers), 10, "orphaned workers gone")
        with pytest.raises(OSError):
            healthz(port, "127.0.0.2")
