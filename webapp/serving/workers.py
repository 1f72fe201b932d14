"""HTTP worker processes: one listening socket, bound here, served by `limits.workers`
forked processes (see `limits.WORKERS` for why), each a waitress server with its own
threads. This process only watches them: one that ends is started again, and stopping
this one (Ctrl+C, SIGTERM, or its death: each worker asks Linux for SIGTERM then) stops
them all.
"""

from __future__ import annotations

import ctypes
import os
import signal
import socket
import sys
import time
from collections import deque
from collections.abc import Callable
from dataclasses import replace
from typing import Any

import click

from .limits import Limits, SharedAddressCount

PR_SET_PDEATHSIG = 1  # from memory: prctl(2), <linux/prctl.h>
STOP_GRACE_S = 10.0  # a worker still running this long after SIGTERM is killed
# A worker that keeps dying (a broken database file, a full disk) is not restarted for ever.
RESTARTS_PER_MINUTE = 5


def bind_listeners(host: str, port: int) -> list[socket.socket]:
    """Listening sockets for `host`:`port` (two for "localhost": IPv4 and IPv6)."""
    from waitress.adjustments import Adjustments

    adj = Adjustments(host=host, port=port)
    sockets: list[socket.socket] = []
    try:
        for family, kind, proto, address in adj.listen:
            listener = socket.socket(family, kind, proto)
            sockets.append(listener)
            listener.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
            if family == socket.AF_INET6:
                listener.setsockopt(socket.IPPROTO_IPV6, socket.IPV6_V6ONLY, 1)
            listener.bind(address)
            listener.listen(adj.backlog)
            port = port or listener.getsockname()[1]  # port 0: the others take the first's
    except OSError:
        for listener in sockets:
            listener.close()
        raise
    return sockets


def serve_in_workers(app: Any, listeners: list[socket.socket], limits: Limits,
                     on_worker_start: Callable[[], None] = lambda: None) -> None:
    """Fork `limits.workers` processes serving `app` on `listeners`; return once they have
    all stopped after this process is told to stop."""
    from . import station_waitress

    count = limits.workers
    addresses = SharedAddressCount(limits.per_address_limit)
    share = replace(limits, connection_limit=max(1, limits.connection_limit // count))
    parent = os.getpid()
    sys.stdout.flush()
    sys.stderr.flush()

    def start(slot: int) -> int:
        pid = os.fork()
        if pid:
            return pid
        code = 1
        try:  # the worker: never returns into the caller's code
            _die_with(parent)
            signal.signal(signal.SIGINT, signal.SIG_IGN)  # the terminal's Ctrl+C is the parent's
            signal.signal(signal.SIGTERM, signal.SIG_DFL)
            server = station_waitress(app, "", 0, share, listeners=listeners,
                                      addresses=addresses)
            on_worker_start()
            server.run()
            code = 0
        except BaseException as error:  # noqa: BLE001 - said, then the worker ends
            click.echo(f"Worker {slot} stopped: {error!r}", err=True)
        finally:
            sys.stdout.flush()
            sys.stderr.flush()
            os._exit(code)

    _supervise(start, count)


def _supervise(start: Callable[[int], int], count: int) -> None:
    workers = {start(slot): slot for slot in range(count)}
    stopping: list[float] = []  # when the stop began (empty while serving)

    def stop(*_: Any) -> None:
        if not stopping:
            stopping.append(time.monotonic())
            for pid in workers:
                _signal(pid, signal.SIGTERM)

    previous = {s: signal.signal(s, stop) for s in (signal.SIGINT, signal.SIGTERM)}
    restarts: deque[float] = deque()
    try:
        while workers:
            pid, status = os.waitpid(-1, os.WNOHANG if stopping else 0)
            if pid == 0:  # stopping, and some are still finishing their requests
                if time.monotonic() - stopping[0] > STOP_GRACE_S:
                    for left in workers:
                        _signal(left, signal.SIGKILL)
                time.sleep(0.05)
                continue
            slot = workers.pop(pid, None)
            if slot is None or stopping:
                continue
            click.echo(f"Worker {slot} (process {pid}) ended ({_ended(status)}); "
                       "starting it again", err=True)
            now = time.monotonic()
            restarts.append(now)
            while restarts and restarts[0] < now - 60:
                restarts.popleft()
            if len(restarts) > RESTARTS_PER_MINUTE * count:
                click.echo("Workers keep ending: the station stops (see the messages above)",
                           err=True)
                stop()
                continue
            workers[start(slot)] = slot
    except ChildProcessError:
        pass
    finally:
        for number, handler in previous.items():
            signal.signal(number, handler)


def _die_with(parent: int) -> None:
    """Ask Linux to send this process SIGTERM when its parent dies (even by kill -9)."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(PR_SET_PDEATHSIG, signal.SIGTERM, 0, 0, 0)
    except (OSError, AttributeError):  # not Linux: the parent's stop still reaches us
        pass
    if os.getppid() != parent:  # it died before we asked
        os._exit(0)


def _signal(pid: int, number: int) -> None:
    try:
        os.kill(pid, number)
    except ProcessLookupError:
        pass


def _ended(status: int) -> str:
    if os.WIFSIGNALED(status):
        return f"signal {signal.Signals(os.WTERMSIG(status)).name}"
    return f"exit code {os.waitstatus_to_exitcode(status)}"
