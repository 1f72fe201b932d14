"""A real `sparkward serve` (HTTP) process over a test database, and /healthz through it."""

from __future__ import annotations

import http.client
import json
import os
import resource
import subprocess
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from tests.https_station import free_port

# The server runs this checkout's code, whatever the venv's editable install points at.
ROOT = str(Path(__file__).resolve().parents[1])


@contextmanager
def serving(db_path: Path, folder: Path, settings: dict[str, float] | None = None,
            open_files_soft: int | None = None) -> Iterator[tuple[int, subprocess.Popen]]:
    """`sparkward serve` on a free port, `settings` in the instance file; yields (port,
    process) once it accepts connections, and stops it afterwards."""
    port = free_port()
    instance = folder / "instance"
    instance.mkdir(exist_ok=True)
    (instance / "sparkward.toml").write_text(
        "".join(f"{key} = {value}\n" for key, value in (settings or {}).items()))
    env = {**os.environ, "SPARKWARD_INSTANCE": str(instance), "PYTHONUNBUFFERED": "1",
           "PYTHONPATH": ROOT}
    env.pop("SPARKWARD_DB", None)
    log = folder / "serve.log"

    def lower_open_files() -> None:  # as a fresh login shell would start it
        if open_files_soft is not None:
            resource.setrlimit(resource.RLIMIT_NOFILE,
                               (open_files_soft, resource.getrlimit(resource.RLIMIT_NOFILE)[1]))

    with log.open("w") as output:
        server = subprocess.Popen(
            [str(Path(sys.executable).with_name("sparkward")), "serve", "--port", str(port),
             "--db", str(db_path)], stdout=output, stderr=subprocess.STDOUT, env=env,
            cwd=folder, preexec_fn=lower_open_files)
    try:
        deadline = time.monotonic() + 15
        while "press Ctrl+C" not in log.read_text():
            assert server.poll() is None, log.read_text()
            assert time.monotonic() < deadline, "not serving in 15 s:\n" + log.read_text()
            time.sleep(0.1)
        yield port, server
    finally:
        server.terminate()
        server.wait(timeout=10)



def healthz(port: int, source: str, timeout: float = 1.0) -> dict:
    """GET /healthz on a fresh connection from `source`; fails unless answered in `timeout`."""
    connection = http.client.HTTPConnection("127.0.0.1", port, timeout=timeout,
                                            source_address=(source, 0))
    started = time.monotonic()
    try:
        connection.request("GET", "/healthz")
        answer = connection.getresponse()
        body = answer.read()
    finally:
        connection.close()
    assert time.monotonic() - started < timeout
    assert answer.status == 200
    return json.loads(body)
