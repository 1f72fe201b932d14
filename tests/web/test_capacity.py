"""No single client stalls the station: the real `sparkward serve` against floods of idle and
slow connections from one address (bounded functional checks, not benchmarks)."""

from __future__ import annotations

import http.client
import json
import socket
import sqlite3
import ssl
import threading
import time
from contextlib import ExitStack
from pathlib import Path

import pytest
from click.testing import CliRunner

from tests.https_station import free_port, serving_https
from tests.station_process import ROOT, healthz, serving
from webapp import store
from webapp.cli import cli
from webapp.serving.limits import CONNECTION_LIMIT, PER_ADDRESS_LIMIT, SPARE_FILES, Limits

FLOODER = "127.0.0.1"
# Linux routes all of 127.0.0.0/8 to the loopback interface (from memory: ip-route's
# default local table), so a client bound here is another address to the server.
OTHER_CLIENT = "127.0.0.2"
IDLE, SLOW = 150, 20  # the flood: connections that send nothing, and half a request line


def _flood(stack: ExitStack, port: int) -> list[socket.socket]:
    """IDLE connections that send nothing and SLOW ones that stop half-way through their
    request line, mixed, all from FLOODER; kept open until `stack` closes."""
    sockets = []
    for i in range(IDLE + SLOW):
        sock = stack.enter_context(socket.create_connection((FLOODER, port), timeout=2))
        if i % 8 == 4 and i < 8 * SLOW:  # 20 slow ones spread through the 170
            sock.sendall(b"GET /healthz HT")
        sockets.append(sock)
    return sockets


def _closed_by_server(sock: socket.socket, wait: float) -> bool:
    """True if the server has closed `sock` (or does within `wait` seconds)."""
    sock.settimeout(wait)
    try:
        return sock.recv(1) == b""  # anything else would be an answer: not expected here
    except (ConnectionResetError, BrokenPipeError):
        return True
    except (TimeoutError, BlockingIOError):
        return False


def _open_count(sockets: list[socket.socket], expected: int) -> int:
    """How many of `sockets` the server keeps open, once it has refused the rest (polled
    until `expected` or 5 s)."""
    deadline = time.monotonic() + 5
    while True:
        open_now = [s for s in sockets if s.fileno() != -1 and not _closed_by_server(s, 0.0)]
        for sock in sockets:
            if sock not in open_now:
                sock.close()
        if len(open_now) <= expected or time.monotonic() > deadline:
            return len(open_now)
        time.sleep(0.1)


def test_one_address_flooding_cannot_stall_another(db_path, tmp_path):
    # Two worker processes: the flooder's share is counted across both.
    with serving(db_path, tmp_path, {"SERVER_WORKERS": 2},
                 open_files_soft=1024) as (port, server), ExitStack() as stack:
        # The server raised its own open-file limit to cover its connection limit.
        limits = Path(f"/proc/{server.pid}/limits").read_text()
        soft = int(next(line for line in limits.splitlines()
                        if line.startswith("Max open files")).split()[3])
        assert soft >= CONNECTION_LIMIT + SPARE_FILES
        assert f"Open-file limit raised from 1024 to {soft}" in (tmp_path / "serve.log").read_text()

        flood = _flood(stack, port)
        assert healthz(port, OTHER_CLIENT)["status"] == "ok"
        # The flooder keeps exactly its share; the rest were closed at once.
        assert _open_count(flood, PER_ADDRESS_LIMIT) == PER_ADDRESS_LIMIT
        fresh = stack.enter_context(socket.create_connection((FLOODER, port), timeout=2))
        assert _closed_by_server(fresh, 2.0)
        assert healthz(port, OTHER_CLIENT)["status"] == "ok"

        # Once its connections close, the address counts from zero again.
        for sock in flood:
            sock.close()
        deadline = time.monotonic() + 3
        while True:
            try:
                assert healthz(port, FLOODER)["status"] == "ok"
                break
            except (ConnectionError, http.client.RemoteDisconnected):
                assert time.monotonic() < deadline, "the address stayed refused"
                time.sleep(0.1)


def test_the_station_holds_more_than_waitress_default_of_100_connections(db_path, tmp_path):
    # Without the per-address cap in the way, one address holds 170 connections (waitress's
    # default connection_limit of 100 stalled every client here) and is still served.
    with serving(db_path, tmp_path, {"SERVER_PER_ADDRESS_LIMIT": 1000}) as (port, _), \
            ExitStack() as stack:
        flood = _flood(stack, port)
        assert healthz(port, FLOODER)["status"] == "ok"
        assert _open_count(flood, IDLE + SLOW) == IDLE + SLOW


def test_idle_and_slow_connections_are_closed_and_working_ones_kept(db_path, tmp_path):
    settings = {"SERVER_IDLE_TIMEOUT_S": 2, "SERVER_HEADER_TIMEOUT_S": 3}
    with serving(db_path, tmp_path, settings) as (port, _), ExitStack() as stack:
        idle = stack.enter_context(socket.create_connection(("127.0.0.1", port)))
        slow = stack.enter_context(socket.create_connection(("127.0.0.1", port)))
        working = http.client.HTTPConnection("127.0.0.1", port, timeout=2)
        stack.callback(working.close)
        started = time.monotonic()
        closed: dict[str, float] = {}
        request = b"GET /healthz HTTP/1.1\r\nHost: station\r\n"
        sent = 0
        answers = 0
        last_sent, longest_gap = started, 0.0
        while time.monotonic() - started < 8 and len(closed) < 2:
            if "idle" not in closed and _closed_by_server(idle, 0.0):
                closed["idle"] = time.monotonic() - started
            if "slow" not in closed:
                try:  # one byte every 0.25 s: never idle, never done
                    slow.sendall(request[sent % len(request):sent % len(request) + 1])
                    sent += 1
                    longest_gap = max(longest_gap, time.monotonic() - last_sent)
                    last_sent = time.monotonic()
                except (BrokenPipeError, ConnectionResetError):
                    closed["slow"] = time.monotonic() - started
                if "slow" not in closed and _closed_by_server(slow, 0.0):
                    closed["slow"] = time.monotonic() - started
            # A tablet asking every half second on its kept connection is never cut off.
            working.request("GET", "/healthz")
            answer = working.getresponse()
            answer.read()
            assert answer.status == 200 and not answer.will_close
            answers += 1
            time.sleep(0.25)
        # Closed after their deadline (checked every cleanup interval), not before.
        assert 2 <= closed.get("idle", 99) < 2 + 2.5, closed
        assert 3 <= closed.get("slow", 99) < 3 + 2.5, closed
        # The slow client was still sending when it was cut off, never quiet for the idle
        # timeout: the header deadline closed it, not the idle one.
        assert last_sent - started > 2 and longest_gap < 2, (last_sent - started, longest_gap)
        assert working.sock is not None and answers >= 10


def test_https_answers_another_client_while_one_address_floods_it(db_path, tmp_path,
                                                                 monkeypatch):
    # Before serving/cheroot_server.py, three connections that said nothing held cheroot's accept
    # loop in their TLS handshakes and no tablet got an answer for over 15 s.
    monkeypatch.setenv("PYTHONPATH", ROOT)
    with serving_https(db_path, tmp_path) as (port, _), ExitStack() as stack:
        _flood(stack, port)
        context = ssl.create_default_context()
        context.check_hostname, context.verify_mode = False, ssl.CERT_NONE
        connection = http.client.HTTPSConnection("127.0.0.1", port, timeout=1, context=context,
                                                 source_address=(OTHER_CLIENT, 0))
        started = time.monotonic()
        try:
            connection.request("GET", "/healthz")
            answer = connection.getresponse()
            assert answer.status == 200 and json.loads(answer.read())["status"] == "ok"
        finally:
            connection.close()
        assert time.monotonic() - started < 1.0


@pytest.mark.parametrize(("setting", "value"), [
    ("SERVER_IDLE_TIMEOUT_S", 0), ("SERVER_THREADS", 2.5), ("SERVER_PER_ADDRESS_LIMIT", -1),
    ("SERVER_HEADER_TIMEOUT_S", '"soon"'), ("SERVER_CONNECTION_LIMIT", "true"),
])
def test_a_bad_limit_in_the_instance_file_is_refused_naming_it(db_path, tmp_path, monkeypatch,
                                                               setting, value):
    instance = tmp_path / "instance"
    instance.mkdir()
    (instance / "sparkward.toml").write_text(f"{setting} = {value}\n")
    monkeypatch.setenv("SPARKWARD_INSTANCE", str(instance))
    result = CliRunner().invoke(cli, ["serve", "--db", str(db_path), "--port", str(free_port())])
    assert result.exit_code == 1, result.output
    assert setting in result.output and "positive" in result.output
    assert "serving" not in result.output


def test_good_limits_are_taken_and_the_cleanup_keeps_up_with_the_shortest_timeout():
    limits = Limits.from_config({"SERVER_IDLE_TIMEOUT_S": 3, "SERVER_THREADS": 4,
                                 "SERVER_HEADER_TIMEOUT_S": 1.5, "OTHER": "ignored"})
    assert (limits.idle_timeout_s, limits.threads, limits.header_timeout_s) == (3.0, 4, 1.5)
    assert limits.cleanup_interval_s == 0.75  # half the shortest timeout
    assert Limits.from_config({}) == Limits()


def test_writers_in_one_process_take_turns_instead_of_meeting_a_busy_database(db_path):
    # SQLite alone makes the second writer sleep-and-retry (or fail at once with no busy
    # timeout); the store's writer lock makes it wait its turn and go straight in.
    holding, order = threading.Event(), []

    def write_slowly() -> None:  # a connection belongs to its thread
        first = store.connect(db_path)
        first.conn.execute("PRAGMA busy_timeout = 0")  # no retrying: a clash would fail
        try:
            with store.writing(first):
                first.conn.execute("create table turn_test (who text)")
                holding.set()
                time.sleep(0.3)
                first.conn.execute("insert into turn_test values ('first')")
                order.append("first")
        finally:
            first.close()

    second = store.connect(db_path)
    second.conn.execute("PRAGMA busy_timeout = 0")
    writer = threading.Thread(target=write_slowly)
    writer.start()
    try:
        assert holding.wait(5)
        with store.writing(second):
            second.conn.execute("insert into turn_test values ('second')")
            order.append("second")
        assert order == ["first", "second"]
        rows = [r[0] for r in second.conn.execute("select who from turn_test order by rowid")]
        assert rows == ["first", "second"]
        # A nested transaction still fails as SQLite makes it fail, without waiting on itself.
        with store.writing(second), pytest.raises(sqlite3.OperationalError, match="within"):
            with store.writing(second):
                pass
    finally:
        writer.join(5)
        second.close()
