"""The load bench's client: HTTP/1.1 keep-alive over raw asyncio streams, and a log-in."""

from __future__ import annotations

import asyncio
import re
from dataclasses import dataclass

PASSWORDS = {"mech1": "demo-mech1", "mech2": "demo-mech2"}  # demo data


@dataclass
class Session:
    """A logged-in session: its cookie and its CSRF token for JSON posts."""

    cookie: str = ""
    token: str = ""


class Connection:
    """One keep-alive connection from `address`, opened on first use and again after the
    server closes it; answers must carry Content-Length (Flask's do)."""

    def __init__(self, port: int, address: str) -> None:
        self.port, self.address = port, address
        self.reader: asyncio.StreamReader | None = None
        self.writer: asyncio.StreamWriter | None = None

    async def request(self, method: str, path: str, headers: dict[str, str] | None = None,
                      body: bytes = b"") -> tuple[int, dict[str, str], bytes]:
        if self.writer is None:
            self.reader, self.writer = await asyncio.open_connection(
                "127.0.0.1", self.port, local_addr=(self.address, 0))
        assert self.reader is not None
        lines = [f"{method} {path} HTTP/1.1", "Host: station"]
        lines += [f"{k}: {v}" for k, v in (headers or {}).items()]
        if body or method == "POST":
            lines.append(f"Content-Length: {len(body)}")
        self.writer.write(("\r\n".join(lines) + "\r\n\r\n").encode() + body)
        head = (await self.reader.readuntil(b"\r\n\r\n")).decode("latin-1").split("\r\n")
        status = int(head[0].split()[1])
        answer: dict[str, str] = {}
        for line in head[1:]:
            if ":" in line:
                name, value = line.split(":", 1)
                answer.setdefault(name.strip().lower(), value.strip())
        data = await self.reader.readexactly(int(answer.get("content-length", "0")))
        assert "chunked" not in answer.get("transfer-encoding", ""), "chunked: not expected"
        if answer.get("connection", "").lower() == "close":
            await self.close()
        return status, answer, data

    async def close(self) -> None:
        if self.writer is not None:
            self.writer.close()
            self.writer = None


async def log_in(port: int, username: str, number: int) -> Session:
    connection = Connection(port, f"127.0.9.{1 + number}")
    try:
        _, head, page = await connection.request("GET", "/login")
        cookie = head["set-cookie"].split(";", 1)[0]
        token = re.search(rb'name="csrf_token"[^>]*value="([^"]+)"', page)
        assert token, "no csrf token on the log-in page"
        form = (f"csrf_token={token.group(1).decode()}&username={username}"
                f"&password={PASSWORDS[username]}").encode()
        status, head, _ = await connection.request(
            "POST", "/login", {"Cookie": cookie,
                               "Content-Type": "application/x-www-form-urlencoded"}, form)
        assert status == 303, status
        cookie = head["set-cookie"].split(";", 1)[0]
        _, head, page = await connection.request("GET", "/fleet", {"Cookie": cookie})
        # The first page after log-in puts the CSRF secret in the session: a new cookie.
        cookie = head.get("set-cookie", cookie).split(";", 1)[0]
        meta = re.search(rb'<meta name="csrf-token" content="([^"]+)"', page)
        assert meta, "no csrf-token meta after log-in"
        return Session(cookie, meta.group(1).decode())
    finally:
        await connection.close()


class IdleHog:
    """A misbehaving client: `count` connections from one address that never send a byte,
    each opened again as soon as the station closes it (its idle and header deadlines and
    its per-address cap close them). Counts what it opened and what the station cut."""

    def __init__(self, port: int, count: int, address: str = "127.0.8.1") -> None:
        self.port, self.count, self.address = port, count, address
        self.opened = self.cut = self.most_held = 0
        self._held: set[asyncio.StreamWriter] = set()

    async def _one(self, ends: float) -> None:
        loop = asyncio.get_running_loop()
        while loop.time() < ends:
            try:
                reader, writer = await asyncio.open_connection(
                    "127.0.0.1", self.port, local_addr=(self.address, 0))
            except OSError:
                await asyncio.sleep(0.2)
                continue
            self.opened += 1
            self._held.add(writer)
            self.most_held = max(self.most_held, len(self._held))
            try:
                await asyncio.wait_for(reader.read(1), max(0.0, ends - loop.time()))
                self.cut += 1  # the station closed it (read gives b"" at its end)
                await asyncio.sleep(0.2)  # and the hog comes straight back
            except (TimeoutError, OSError):
                pass
            finally:
                self._held.discard(writer)
                writer.close()

    async def hold(self, seconds: float) -> None:
        ends = asyncio.get_running_loop().time() + seconds
        await asyncio.gather(*(self._one(ends) for _ in range(self.count)))
