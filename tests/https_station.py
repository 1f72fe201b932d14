"""A real `sparkward serve --https` process over a copy of the demo database, for tests."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


@contextmanager
def serving_https(db_path: Path, folder: Path, names: Sequence[str] = ()
                  ) -> Iterator[tuple[int, Path]]:
    """The station serving HTTPS on a free local port with `--name` for each of `names`;
    yields (port, the server's log file) once it answers, and stops it afterwards."""
    port = free_port()
    log = folder / "serve.log"
    env = {**os.environ, "SPARKWARD_INSTANCE": str(folder / "instance"),
           "PYTHONUNBUFFERED": "1"}
    env.pop("SPARKWARD_DB", None)
    command = [str(Path(sys.executable).with_name("sparkward")), "serve", "--https",
               "--port", str(port), "--db", str(db_path)]
    for name in names:
        command += ["--name", name]
    with log.open("w") as output:
        server = subprocess.Popen(command, stdout=output, stderr=subprocess.STDOUT, env=env,
                                  cwd=folder)
    try:
        deadline = time.monotonic() + 15
        while True:
            assert server.poll() is None, log.read_text()
            try:
                socket.create_connection(("127.0.0.1", port), timeout=0.5).close()
                break
            except OSError:
                assert time.monotonic() < deadline, "no answer in 15 s:\n" + log.read_text()
                time.sleep(0.1)
        yield port, log
    finally:
        server.terminate()
        server.wait(timeout=10)
