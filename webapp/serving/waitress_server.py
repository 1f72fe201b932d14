"""Waitress with two limits it lacks: open connections per client address, and a deadline
for a request's headers (see `limits` for the values and why)."""

from __future__ import annotations

import time
from typing import Any

from waitress.channel import HTTPChannel
from waitress.server import TcpWSGIServer

from .limits import AddressCount, Limits


class StationChannel(HTTPChannel):
    """A client connection that counts against its address and times its headers."""

    # When the request now being received began (None between requests, and once its
    # headers are in: a slow body is bounded by the idle timeout and the body limit).
    headers_began: float | None = None
    counted_address: str | None = None

    def received(self, data: bytes) -> bool:
        if self.request is None:
            # This data starts a request. (If it also finishes one and starts the next,
            # the older start is kept: stricter by at most one request, never looser.)
            self.headers_began = self.headers_began or time.time()
        result = super().received(data)
        if self.request is None or self.request.headers_finished:
            self.headers_began = None
        return bool(result)

    def del_channel(self, map: Any = None) -> None:
        super().del_channel(map)
        if self.counted_address is not None:  # once, however often waitress calls this
            self.server.addresses.release(self.counted_address)
            self.counted_address = None


class StationServer(TcpWSGIServer):
    """Waitress's TCP server, refusing an address's connections beyond its limit and
    closing connections whose headers take longer than the deadline."""

    def __init__(self, *args: Any, limits: Limits, addresses: AddressCount | None = None,
                 **kw: Any) -> None:
        self.addresses = addresses or AddressCount(limits.per_address_limit)
        self.header_timeout_s = limits.header_timeout_s
        super().__init__(*args, **kw)

    def handle_accept(self) -> None:
        # As TcpWSGIServer.handle_accept, with the per-address count between accept and
        # the channel: a refused connection is closed at once and never reaches the app.
        try:
            accepted = self.accept()
            if accepted is None:
                return
            conn, addr = accepted
            self.set_socket_options(conn)
        except OSError:
            return  # the client left before we looked at it (waitress does the same)
        address = str(addr[0])
        if not self.addresses.admit(address):
            conn.close()
            return
        channel = StationChannel(self, conn, self.fix_addr(addr), self.adj, map=self._map)
        channel.counted_address = address

    def maintenance(self, now: float) -> None:
        """Close idle connections (waitress) and those still sending their headers after
        the deadline, however slowly they trickle bytes."""
        super().maintenance(now)
        cutoff = now - self.header_timeout_s
        for channel in list(self.active_channels.values()):
            began = getattr(channel, "headers_began", None)
            if began is not None and began < cutoff:
                channel.will_close = True
