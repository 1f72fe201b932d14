"""A TCP relay between Chromium and a live station: counts the bytes each way, and can be
switched to the hangar's worst Wi-Fi, one that connects and then never answers.

`hold()`: connections are still accepted and requests read, but nothing reaches the station
(so nothing comes back) until `release()`, which forwards what was held: a station that
answers late. `refuse()`: the Wi-Fi is up but the station cannot be reached: every
connection, open or new, is closed at once, until `release()`. Used by the page-timeout and
offline property browser tests and by bench/shell_bytes.py.
"""

from __future__ import annotations

import socket
import threading


class StationProxy:
    def __init__(self, station_port: int) -> None:
        self.station_port = station_port
        self._listener = socket.create_server(("127.0.0.1", 0))
        self.port = self._listener.getsockname()[1]
        self._flowing = threading.Event()
        self._flowing.set()
        self._refusing = False
        self._closed = False
        self._lock = threading.Lock()
        self.bytes_to_tablet = 0  # the station's answers, headers and bodies, as sent
        self.bytes_to_station = 0
        self._sockets: list[socket.socket] = []
        threading.Thread(target=self._accept, daemon=True).start()

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def hold(self) -> None:
        self._flowing.clear()

    def release(self) -> None:
        self._refusing = False
        self._flowing.set()

    def refuse(self) -> None:
        self._refusing = True
        self._flowing.set()
        for sock in list(self._sockets):
            try:
                sock.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass

    def reset_counts(self) -> None:
        with self._lock:
            self.bytes_to_tablet = self.bytes_to_station = 0

    def close(self) -> None:
        self._closed = True
        self._flowing.set()
        self._listener.close()
        for sock in list(self._sockets):
            try:
                sock.close()
            except OSError:
                pass

    def _accept(self) -> None:
        while not self._closed:
            try:
                tablet, _ = self._listener.accept()
            except OSError:
                return
            if self._refusing:
                tablet.close()
                continue
            try:
                station = socket.create_connection(("127.0.0.1", self.station_port))
            except OSError:
                tablet.close()
                continue
            self._sockets += [tablet, station]
            threading.Thread(target=self._pump, args=(tablet, station, True),
                             daemon=True).start()
            threading.Thread(target=self._pump, args=(station, tablet, False),
                             daemon=True).start()

    def _pump(self, source: socket.socket, sink: socket.socket, to_station: bool) -> None:
        try:
            while True:
                data = source.recv(65536)
                if not data:
                    break
                if to_station:
                    self._flowing.wait()  # held: read, never forwarded until released
                sink.sendall(data)
                with self._lock:
                    if to_station:
                        self.bytes_to_station += len(data)
                    else:
                        self.bytes_to_tablet += len(data)
        except OSError:
            pass
        finally:
            for sock in (source, sink):
                try:
                    sock.shutdown(socket.SHUT_RDWR)
                except OSError:
                    pass
