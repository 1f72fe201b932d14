"""Cheroot over TLS for `sparkward serve --https`, changed so one client cannot stall it.

Cheroot as shipped makes the TLS handshake inside its accept loop, which waits up to its
socket timeout for each client: one connection that says nothing stops every tablet for
that long, a hundred of them for minutes. It also hands a new connection to a worker
thread before the client has sent a byte. Here the handshake moves to the worker thread
(the first read makes it), a new connection waits in cheroot's selector (no thread) until
it has something to say, and each client address has a cap on open connections.
"""

from __future__ import annotations

import ssl
from typing import Any

from cheroot import server as cheroot_http
from cheroot import wsgi
from cheroot.ssl.builtin import BuiltinSSLAdapter

from .limits import (
    HTTPS_SOCKET_TIMEOUT_S,
    HTTPS_THREADS,
    MAX_REQUEST_BODY_BYTES,
    MAX_REQUEST_HEADER_BYTES,
    AddressCount,
    Limits,
)


class HandshakeInWorkerAdapter(BuiltinSSLAdapter):
    """Wrap an accepted socket for TLS without the handshake; OpenSSL makes it on the
    first read, in the worker thread that serves the connection."""

    def wrap(self, sock: Any) -> tuple[Any, dict[str, str]]:
        wrapped = self.context.wrap_socket(sock, server_side=True,
                                           do_handshake_on_connect=False)
        # The handshake has not happened, so the cipher is not known yet: the app needs
        # only the scheme (for secure cookies and absolute URLs).
        return wrapped, {"wsgi.url_scheme": "https", "HTTPS": "on"}


class StationConnection(cheroot_http.HTTPConnection):
    """A connection that gives its address's count back when it closes (once)."""

    counted_address: str | None = None
    seen = False  # False until the client has sent something

    def close(self) -> None:
        try:
            super().close()
        finally:
            if self.counted_address is not None:
                self.server.addresses.release(self.counted_address)
                self.counted_address = None


class StationCheroot(wsgi.Server):
    ConnectionClass = StationConnection

    def __init__(self, *args: Any, limits: Limits, **kw: Any) -> None:
        super().__init__(*args, **kw)
        self.addresses = AddressCount(limits.per_address_limit)

    def process_conn(self, conn: Any) -> None:
        if isinstance(conn, StationConnection) and not conn.seen:
            conn.seen = True
            address = str(conn.remote_addr or "unknown")
            if not self.addresses.admit(address):
                conn.close()
                return
            conn.counted_address = address
            # Wait in the selector, without a thread, until the client sends something;
            # cheroot closes it there after `timeout` seconds of silence.
            self._connections.put(conn)  # type: ignore[attr-defined]  # set by prepare()
            return
        super().process_conn(conn)


def station_cheroot(app: Any, host: str, port: int, tls: Any, limits: Limits) -> StationCheroot:
    """The HTTPS server for `app` with the station's certificate (call `prepare()`, then
    `serve()`; `stop()` to end)."""
    adapter = HandshakeInWorkerAdapter(str(tls.cert_file), str(tls.key_file),
                                       private_key_password=tls.key_password)
    adapter.context.minimum_version = ssl.TLSVersion.TLSv1_2
    idle = min(limits.idle_timeout_s, HTTPS_SOCKET_TIMEOUT_S)
    server = StationCheroot((host, port), app, numthreads=max(HTTPS_THREADS, limits.threads),
                            server_name="Sparkward", timeout=idle, limits=limits,
                            # 1,024 pending connections in the OS queue, as waitress.
                            request_queue_size=1024)
    server.ssl_adapter = adapter
    # Idle keep-alive connections cost no thread here; keep as many as the station serves
    # (cheroot keeps 10 by default, so most tablets would reconnect, with a new TLS
    # handshake, on every tap).
    server.keep_alive_conn_limit = limits.connection_limit
    server.max_request_header_size = MAX_REQUEST_HEADER_BYTES
    server.max_request_body_size = MAX_REQUEST_BODY_BYTES
    return server
