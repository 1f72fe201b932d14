"""The server's limits for 200 tablets, each with its reasoning, and the per-address count.

Every limit is a named constant; a station can change the ones marked "settable" in
`instance/sparkward.toml` (the `SERVER_*` keys of `Limits`).
"""

from __future__ import annotations

import os
import resource
import threading
import time
import zlib
from collections import Counter
from dataclasses import dataclass, replace
from typing import Any

import click

TABLETS = 200
# A browser keeps up to 6 HTTP/1.1 connections to one host (from memory: the per-host
# limit of Chromium, WebKit and Firefox); 200 tablets x 6 = 1,200, plus room for the
# supervisor's desk and a reconnecting wave after Wi-Fi drops.
CONNECTION_LIMIT = 1500
# One address, one tablet: 6 connections are its normal share. 64 leaves room for a
# tablet's reconnects and a shop PC's tabs, and stops one client (or one probe) from
# taking the connection table (settable: a station behind a reverse proxy sees one address).
PER_ADDRESS_LIMIT = 64
# Close a keep-alive connection idle this long. Tablets tap every few seconds to minutes;
# a reconnect costs ~1 ms on the LAN, while an idle connection costs a file descriptor.
# 30 s keeps a working tablet's connection warm between taps (settable).
IDLE_TIMEOUT_S = 30.0
# A client must finish its request line and headers this long after it starts them, however
# slowly it trickles bytes (a "slowloris" keeps each connection just active enough to
# beat the idle timeout). A tablet sends its headers in one packet; 10 s allows a weak
# Wi-Fi link many retransmissions (settable). Waitress has no such limit: added below.
HEADER_TIMEOUT_S = 10.0
# How often the waitress loop looks for idle and slow connections: the two timeouts above
# are enforced to within this (waitress's default is 30 s).
CLEANUP_INTERVAL_S = 2.0
# Request headers: a tablet sends about 1 KB (cookie, CSRF token); 64 KB is generous and
# bounds what a client can make the server buffer before the app sees anything.
MAX_REQUEST_HEADER_BYTES = 64 * 1024
# Request bodies: the app refuses JSON over 256 KB and PDF uploads over 20 MB itself, with
# a message that names the field; the server's own cut-off sits above the largest of those
# so the app's clear answer wins, and still stops a 1 GB upload (waitress's default).
MAX_REQUEST_BODY_BYTES = 32 * 1024 * 1024
# Worker threads (settable). Measured with bench/load.py at 200 simulated tablets on the
# 2-core station machine, 8 against 16 against 32, interleaved: 32 gave the shortest p95
# for step pages and event posts in each round (bench/README.md). A thread waiting for
# its turn to write, or for the disk, holds no CPU; with more of them the pages go on
# being served meanwhile. SQLite keeps one connection per thread (3 files each).
THREADS = 32
# File descriptors besides the connections: SQLite keeps 3 per thread (database, WAL,
# shared memory), plus the listening sockets, logs, PDFs being signed, the CA files.
SPARE_FILES = 256
# HTTPS (cheroot): one worker thread per request in progress; idle keep-alive connections
# wait in cheroot's selector without a thread. A client that trickles its request holds a
# thread until `HTTPS_SOCKET_TIMEOUT_S` passes with no byte: twice the threads of HTTP,
# and a short timeout, so a few slow clients cannot take them all.
HTTPS_THREADS = 64
# HTTP worker processes (settable). Python runs one thread at a time per process, so one
# process used about one core of the two however many threads it had: at 200 simulated
# tablets it sat near 0.75 of a core and the posts' p95 strayed past 100 ms (bench/README.md).
# One process per core lets both serve; they share the listening socket (the kernel
# hands each new connection to a process that is waiting in accept, so the idler one
# takes more), the per-address count (`SharedAddressCount`) and the writer queue (an
# flock, store/writer_lock.py). Each process keeps its own threads and connection share.
WORKERS = max(1, min(os.cpu_count() or 1, 4))
HTTPS_SOCKET_TIMEOUT_S = 10.0


@dataclass(frozen=True)
class Limits:
    """What the server enforces; the `SERVER_*` config keys override the defaults."""

    threads: int = THREADS
    connection_limit: int = CONNECTION_LIMIT
    per_address_limit: int = PER_ADDRESS_LIMIT
    idle_timeout_s: float = IDLE_TIMEOUT_S
    header_timeout_s: float = HEADER_TIMEOUT_S
    cleanup_interval_s: float = CLEANUP_INTERVAL_S
    workers: int = WORKERS

    @classmethod
    def from_config(cls, config: Any) -> Limits:
        """The defaults, with any `SERVER_<FIELD>` key of `config` (a positive number)."""
        overrides: dict[str, Any] = {}
        for name, kind in (("threads", int), ("connection_limit", int),
                           ("per_address_limit", int), ("idle_timeout_s", float),
                           ("header_timeout_s", float), ("cleanup_interval_s", float),
                           ("workers", int)):
            key = "SERVER_" + name.upper()
            if key not in config:
                continue
            value = config[key]
            if isinstance(value, bool) or not isinstance(value, int | float) or value <= 0 \
                    or (kind is int and value != int(value)):
                raise click.ClickException(
                    f"{key} in the instance file must be a positive "
                    f"{'whole number' if kind is int else 'number'}, not {value!r}")
            overrides[name] = kind(value)
        limits = cls(**overrides)
        # The checks run every cleanup interval: keep it below the shorter timeout.
        shortest = min(limits.idle_timeout_s, limits.header_timeout_s)
        return replace(limits, cleanup_interval_s=min(limits.cleanup_interval_s,
                                                      max(shortest / 2, 0.5)))


def raise_open_files_limit(limits: Limits) -> Limits:
    """Raise this process's soft limit on open files to cover the connection limit.

    Linux starts a process at 1,024 open files (soft) with a much higher hard limit; the
    soft one is ours to raise. If the hard limit is lower than we need, the connection
    limit shrinks to fit instead, and the start-up message says so.
    """
    soft, hard = resource.getrlimit(resource.RLIMIT_NOFILE)
    wanted = limits.connection_limit + SPARE_FILES
    if hard != resource.RLIM_INFINITY:
        wanted = min(wanted, hard)
    if wanted > soft:
        resource.setrlimit(resource.RLIMIT_NOFILE, (wanted, hard))
        click.echo(f"Open-file limit raised from {soft} to {wanted} for "
                   f"{limits.connection_limit} connections.")
        soft = wanted
    if soft < limits.connection_limit + SPARE_FILES:
        fitted = max(soft - SPARE_FILES, 16)
        click.echo(f"Open-file limit {soft} (hard {hard}): serving at most {fitted} "
                   f"connections instead of {limits.connection_limit}.")
        return replace(limits, connection_limit=fitted)
    return limits


class AddressCount:
    """Open connections per client address, shared by a server's accept and close paths."""

    def __init__(self, limit: int) -> None:
        self.limit = limit
        self._open: Counter[str] = Counter()
        self._lock = threading.Lock()
        self._warned: dict[str, float] = {}

    def admit(self, address: str) -> bool:
        """Count one more connection from `address`, or refuse it when it has `limit`."""
        with self._lock:
            if self._open[address] >= self.limit:
                refused = True
            else:
                self._open[address] += 1
                refused = False
        if refused:
            self._warn(address)
        return not refused

    def _warn(self, address: str) -> None:
        if time.monotonic() - self._warned.get(address, -1e9) > 60:
            self._warned[address] = time.monotonic()  # once a minute, not once a connection
            click.echo(f"Refusing connections from {address}: it has {self.limit} open "
                       "(the per-address limit)", err=True)

    def release(self, address: str) -> None:
        with self._lock:
            self._open[address] -= 1
            if self._open[address] <= 0:
                del self._open[address]


class SharedAddressCount(AddressCount):
    """`AddressCount` in memory shared by forked worker processes: counts in a fixed table
    of buckets (an address's bucket from its CRC-32), under one lock across processes. Two
    addresses that share a bucket share its limit too: stricter, never looser (with 65,536
    buckets and 200 tablets, a few pairs of tablets at most, each far under its limit)."""

    BUCKETS = 65536

    def __init__(self, limit: int) -> None:
        import multiprocessing

        super().__init__(limit)
        context = multiprocessing.get_context("fork")
        self._counts = context.RawArray("i", self.BUCKETS)
        self._lock = context.Lock()  # type: ignore[assignment]

    def _bucket(self, address: str) -> int:
        return zlib.crc32(address.encode()) % self.BUCKETS

    def admit(self, address: str) -> bool:
        bucket = self._bucket(address)
        with self._lock:
            admitted = self._counts[bucket] < self.limit
            if admitted:
                self._counts[bucket] += 1
        if not admitted:
            self._warn(address)
        return admitted

    def release(self, address: str) -> None:
        bucket = self._bucket(address)
        with self._lock:
            self._counts[bucket] = max(0, self._counts[bucket] - 1)
