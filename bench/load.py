"""Bench: 20 to 200 simulated tablets against the real waitress server, station against bare.

Each simulated tablet keeps one HTTP/1.1 keep-alive connection from its own loopback address
and loops: GET its job's step page, think 1-3 s, POST the next step's event (201 asserted).
The same tablets then run against a bare Flask app (a small page and a JSON POST that does
no work) served by the same waitress configuration, in the same run. Prints throughput and
p50/p95/p99 per request kind and level, and the ratio station / bare.

    .venv/bin/python bench/load.py [--levels 20 50 100 200] [--seconds 8] [--threads 16]
                                   [--workers 1] [--idle-hog 0]

Localhost only; bounded: each level runs `--seconds` (plus a 2 s ramp) per app.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import random
import subprocess
import sys
import tempfile
import time
import uuid
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from load_client import Connection, IdleHog, Session, log_in  # bench/ is on sys.path
from measuring import percentile
from step_page import _event_for, _procedure_yaml

from webapp import create_app, store
from webapp.domain.errors import RuleRefusal
from webapp.station import recording
from webapp.station.library import load_shop_library
from webapp.station.scenario import load_scenario, read_scenario, scenario_path
from webapp.store import fleet, people

PROCEDURE = "bench-load"
# Think time between a tablet's page and its tap. A mechanic reads a step and does the
# work, which takes tens of seconds to minutes; 1-3 s makes each simulated tablet ten or
# more times busier than a real one, so 200 of them are a pessimistic hangar.
THINK_S = (1.0, 3.0)
RAMP_S = 2.0  # tablets start spread over this, and nothing is counted before it ends
TARGET_P95_MS = 100.0
MECHANICS = ("mech1", "mech2")  # demo data; several tablets share each log-in


# --- the station and the servers (subprocesses: the server must not share our GIL) ----------

def build_station(tmp: Path, tablets: int, steps: int, walked: int) -> dict[str, Any]:
    """A throwaway demo station with one open job per tablet, each `walked` steps in."""
    library = tmp / "library"
    library.mkdir()
    (library / f"{PROCEDURE}.yaml").write_text(
        _procedure_yaml(PROCEDURE, "Bench procedure for the load run", steps), encoding="utf-8")
    now = datetime.now(UTC)
    db_path = tmp / "station.db"
    db = store.create(db_path)
    try:
        load_shop_library(db, now)
        load_shop_library(db, now, [library])
        load_scenario(db, read_scenario(scenario_path()), now)
        engines = [e["id"] for a in fleet.fleet(db) for e in a["engines"]]
        jobs: list[int] = []
        for number in range(tablets):
            person = people.person_by_username(db, MECHANICS[number % len(MECHANICS)])
            assert person is not None
            while True:  # spread the jobs over the engines the bench procedure applies to
                try:
                    job = recording.open_job(db, procedure_id=PROCEDURE,
                                             engine_id=engines[number % len(engines)],
                                             channel=None, person=person, now=now)
                    break
                except RuleRefusal:
                    engines.remove(engines[number % len(engines)])
            for _ in range(walked):
                nxt = recording.load_job(db, job).state.next_step
                assert nxt is not None
                kind, data = _event_for(nxt.step)
                outcome = recording.record_event(db, job, event_id=str(uuid.uuid4()), kind=kind,
                                                 step_id=nxt.id, data=data, device_time=None,
                                                 person=person, now=now)
                assert outcome.status == "stored", outcome
            jobs.append(job)
        plan = [(s.id, *_event_for(s.step))
                for s in recording.load_job(db, jobs[0]).state.steps][walked:]
    finally:
        db.close()
    return {"db_path": db_path, "jobs": jobs, "plan": plan}


def bare_app() -> Any:
    """The floor: Flask with a small page and a JSON POST that does no work."""
    from flask import Flask, jsonify, request

    app = Flask("bare")
    page = "<!doctype html><title>Step</title>" + "<p>Bench step text.</p>" * 40

    @app.get("/page")
    def small_page() -> Any:
        return page

    @app.post("/event")
    def small_post() -> Any:
        return jsonify({"received": len(request.get_json()["id"])}), 201

    return app


def serve_only(which: str, db_path: str, limits: Any, port_file: Path) -> None:
    """Run in the server subprocess: the chosen app as `sparkward serve` runs it (waitress in
    `limits.workers` processes on one listening socket)."""
    from webapp.serving import station_waitress
    from webapp.serving.limits import raise_open_files_limit
    from webapp.serving.workers import bind_listeners, serve_in_workers

    app = bare_app() if which == "bare" else create_app(
        {"DB_PATH": db_path, "SECRET_KEY": "bench", "TESTING": False})
    limits = raise_open_files_limit(limits)
    listeners = bind_listeners("127.0.0.1", 0)
    port_file.with_suffix(".tmp").write_text(str(listeners[0].getsockname()[1]))
    port_file.with_suffix(".tmp").rename(port_file)  # the client never reads half a number
    if limits.workers == 1:
        station_waitress(app, "127.0.0.1", 0, limits, listeners=listeners).run()
    else:
        serve_in_workers(app, listeners, limits)


def start_server(which: str, db_path: Path, limits: Any, tmp: Path) -> tuple[Any, int]:
    """Start the server process; its port is 0 until `wait_for_port` reads it."""
    port_file = tmp / f"{which}.port"
    process = subprocess.Popen([sys.executable, __file__, "--serve", which, "--db", str(db_path),
                                "--threads", str(limits.threads), "--workers",
                                str(limits.workers), "--port-file", str(port_file)],
                               env={**os.environ, "PYTHONPATH": str(Path(__file__).parents[1])})
    return process, 0


def wait_for_port(process: Any, port_file: Path) -> int:
    deadline = time.monotonic() + 30
    while not port_file.exists() or not port_file.read_text():
        assert process.poll() is None and time.monotonic() < deadline, "server did not start"
        time.sleep(0.05)
    return int(port_file.read_text())


def cpu_seconds(pid: int) -> float:
    """User + system CPU time of a process and its worker processes (Linux /proc/<pid>/stat,
    fields 14 and 15; a worker is a process whose parent, field 4, is `pid`)."""
    total = 0.0
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue  # it ended while we looked
        if stat.parent.name == str(pid) or fields[1] == str(pid):
            total += (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")
    return total


# --- the simulated tablets ---------------------------------------------------------------

@dataclass
class Tablet:
    number: int
    session: Session
    job: int | None  # None against the bare app
    plan: list[tuple[str, str, dict[str, Any]]]
    posted: int = 0
    samples: dict[str, list[float]] = field(default_factory=lambda: {"page": [], "post": []})
    errors: list[str] = field(default_factory=list)

    @property
    def address(self) -> str:  # 127.0.1.1, 127.0.1.2, ...: one client address per tablet
        return f"127.0.{1 + self.number // 250}.{1 + self.number % 250}"


async def run_tablet(tablet: Tablet, port: int, counted_from: float, ends: float) -> None:
    connection = Connection(port, tablet.address)
    page = f"/jobs/{tablet.job}" if tablet.job else "/page"
    post = f"/api/jobs/{tablet.job}/events" if tablet.job else "/event"
    headers = {"Cookie": tablet.session.cookie}
    await asyncio.sleep(random.uniform(0, RAMP_S))
    try:
        while time.monotonic() < ends:
            started = time.monotonic()
            status, _, _ = await connection.request("GET", page, headers)
            if status != 200:
                tablet.errors.append(f"GET {status}")
            elif started >= counted_from:
                tablet.samples["page"].append(time.monotonic() - started)
            # Think, but not past the end of the level: the next level waits for this one.
            await asyncio.sleep(min(random.uniform(*THINK_S), max(0.0, ends - time.monotonic())))
            if time.monotonic() >= ends or tablet.posted >= len(tablet.plan):
                continue  # out of steps: this tablet only reads pages from here
            step, kind, data = tablet.plan[tablet.posted]
            body = json.dumps({"id": str(uuid.uuid4()), "kind": kind, "step": step,
                               "data": data}).encode()
            started = time.monotonic()
            status, _, answer = await connection.request(
                "POST", post, {**headers, "X-CSRFToken": tablet.session.token,
                               "Content-Type": "application/json"}, body)
            if status != 201:
                tablet.errors.append(f"POST {status} {answer[:120]!r}")
            else:
                tablet.posted += 1 if tablet.job else 0
                if started >= counted_from:
                    tablet.samples["post"].append(time.monotonic() - started)
    finally:
        await connection.close()


async def run_level(tablets: list[Tablet], port: int, seconds: float,
                    hog: IdleHog | None) -> float:
    for tablet in tablets:
        tablet.samples = {"page": [], "post": []}
    counted_from = time.monotonic() + RAMP_S
    ends = counted_from + seconds
    holding = [hog.hold(ends - time.monotonic())] if hog else []
    await asyncio.gather(*holding, *(run_tablet(t, port, counted_from, ends) for t in tablets))
    return ends - counted_from


# --- the run and the report ---------------------------------------------------------------

def summary(tablets: list[Tablet], seconds: float) -> dict[str, Any]:
    out: dict[str, Any] = {"errors": [e for t in tablets for e in t.errors]}
    total = 0
    for kind in ("page", "post"):
        values = [v * 1000 for t in tablets for v in t.samples[kind]]
        total += len(values)
        out[kind] = ([percentile(values, p) for p in (0.5, 0.95, 0.99)]
                     if values else [float("nan")] * 3)
        out[kind + "_n"] = len(values)
    out["rps"] = total / seconds
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--levels", type=int, nargs="+", default=[20, 50, 100, 200])
    parser.add_argument("--seconds", type=float, default=8.0,
                        help="counted seconds per level and app, after a 2 s ramp (default 8)")
    parser.add_argument("--threads", type=int, default=None,
                        help="waitress threads (default: the station's THREADS)")
    parser.add_argument("--workers", type=int, default=None,
                        help="server processes (default: the station's WORKERS)")
    parser.add_argument("--sessions", type=int, default=10,
                        help="log-ins, shared round-robin by the tablets (default 10)")
    parser.add_argument("--walked", type=int, default=5,
                        help="steps each tablet's job has done before the run (default 5)")
    parser.add_argument("--idle-hog", type=int, default=99,
                        help="idle connections one misbehaving client holds open from one "
                             "address through every run (default 99; 0 for none)")
    parser.add_argument("--serve", choices=["station", "bare"], help=argparse.SUPPRESS)
    parser.add_argument("--db", help=argparse.SUPPRESS)
    parser.add_argument("--port-file", type=Path, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    from webapp.serving.limits import THREADS, WORKERS, Limits

    limits = Limits(threads=args.threads or THREADS, workers=args.workers or WORKERS)
    if args.serve:
        serve_only(args.serve, args.db, limits, args.port_file)
        return 0
    if max(args.levels) > 1000 or args.seconds > 60 or min(args.levels) < 1:
        parser.error("levels 1..1000 tablets, at most 60 s each")
    return asyncio.run(run(args, limits))


async def run(args: argparse.Namespace, limits: Any) -> int:
    tablets_max = max(args.levels)
    rounds = int(len(args.levels) * (args.seconds + RAMP_S) / THINK_S[0]) + 5
    with tempfile.TemporaryDirectory(prefix="sparkward-load-") as tmpname:
        tmp = Path(tmpname)
        os.environ["SPARKWARD_INSTANCE"] = str(tmp / "instance")
        os.environ.pop("SPARKWARD_DB", None)
        built_at = time.monotonic()
        built = build_station(tmp, tablets_max, args.walked + rounds + 5, args.walked)
        print(f"Station built in {time.monotonic() - built_at:.1f} s: {tablets_max} open jobs "
              f"of {len(built['plan']) + args.walked} steps, {args.walked} done in each")
        servers = {}
        try:
            for which in ("station", "bare"):  # both start at once; each waits for its port
                servers[which] = start_server(which, built["db_path"], limits, tmp)
            for which, (process, _) in servers.items():
                servers[which] = (process, wait_for_port(process, tmp / f"{which}.port"))
            port = servers["station"][1]
            login_at = time.monotonic()
            sessions = [await log_in(port, MECHANICS[i % len(MECHANICS)], i)
                        for i in range(min(args.sessions, tablets_max))]
            print(f"{len(sessions)} log-ins through /login in {time.monotonic() - login_at:.1f} s "
                  f"(each tablet shares one: every request looks its session row up by the "
                  f"token's hash, the same work whether the row is shared or not)")
            # A tablet shares the log-in of its job's mechanic: tablet n's job was opened by
            # MECHANICS[n % 2], and so was session n % sessions when sessions is even.
            assert len(sessions) % len(MECHANICS) == 0 or len(sessions) == 1
            results: dict[tuple[str, int], dict[str, Any]] = {}
            progress: dict[int, int] = {}  # steps each job has taken, carried between levels
            for level in args.levels:
                for which in ("station", "bare") if level % 2 == 0 else ("bare", "station"):
                    process, port = servers[which]
                    tablets = [Tablet(n, sessions[n % len(sessions)],
                                      built["jobs"][n] if which == "station" else None,
                                      built["plan"]) for n in range(level)]
                    if which == "station":
                        for tablet in tablets:
                            tablet.posted = progress.get(tablet.number, 0)
                    client_cpu, server_cpu = time.process_time(), cpu_seconds(process.pid)
                    hog = IdleHog(port, args.idle_hog) if args.idle_hog else None
                    counted = await run_level(tablets, port, args.seconds, hog)
                    result = summary(tablets, counted)
                    result["hog"] = (hog.most_held, hog.opened, hog.cut) if hog else None
                    result["cpu"] = (time.process_time() - client_cpu,
                                     cpu_seconds(process.pid) - server_cpu)
                    results[(which, level)] = result
                    if which == "station":
                        progress.update((t.number, t.posted) for t in tablets)
        finally:
            for process, _ in servers.values():
                process.terminate()
                process.wait(timeout=10)
    report(args, limits, results)
    return 1 if any(results[(w, lv)]["errors"] for w in ("station", "bare")
                    for lv in args.levels) else 0


def report(args: argparse.Namespace, limits: Any, results: dict[tuple[str, int], Any]) -> None:
    cores = os.cpu_count()
    print(f"\nwaitress, {limits.workers} process(es) of {limits.threads} threads; {cores} cores "
          f"shared by the server and this load generator (CPU seconds of each below); "
          f"think {THINK_S[0]:g}-{THINK_S[1]:g} s; "
          f"{args.seconds:g} s counted per level after a {RAMP_S:g} s ramp")
    print("page = GET /jobs/<id> (station) or a small page (bare); post = POST an event "
          "(station, 201 each) or a small JSON POST (bare)\n")
    print(f"{'tablets':>7} {'app':<8}{'req/s':>7}  {'page p50/p95/p99 ms':>21}  "
          f"{'post p50/p95/p99 ms':>21}  {'cpu s client/server':>19}  errors")
    for level in args.levels:
        for which in ("bare", "station"):
            r = results[(which, level)]
            print(f"{level:>7} {which:<8}{r['rps']:>7.1f}  "
                  + "  ".join(f"{'/'.join(f'{v:.1f}' for v in r[k]):>21}" for k in ("page", "post"))
                  + f"  {r['cpu'][0]:>8.1f} / {r['cpu'][1]:<8.1f}  {len(r['errors'])}")
    print(f"\n{'tablets':>7}  ratio station / bare: {'page p50/p95/p99':>20}  "
          f"{'post p50/p95/p99':>20}  req/s")
    for level in args.levels:
        ours, bare = results[("station", level)], results[("bare", level)]
        print(f"{level:>7}  {'':22}"
              + "  ".join(f"{'/'.join(f'{o / b:.1f}x' for o, b in pairs):>20}"
                          for pairs in (zip(ours[k], bare[k], strict=True)
                                        for k in ("page", "post")))
              + f"  {ours['rps'] / bare['rps']:.2f}")
    if args.idle_hog:
        print(f"\nmeanwhile one client at 127.0.8.1 kept trying to hold {args.idle_hog} idle "
              f"connections (never sending a byte; each one cut was opened again after 0.2 s):")
        for level in args.levels:
            held, opened, cut = results[("station", level)]["hog"]
            print(f"{level:>7} tablets: at most {held} open at once on its side, "
                  f"{opened} opened, {cut} cut by the station")
    top = results[("station", max(args.levels))]
    met = all(top[k][1] < TARGET_P95_MS for k in ("page", "post"))
    print(f"\ntarget: p95 < {TARGET_P95_MS:g} ms for step pages and event posts at "
          f"{max(args.levels)} tablets{' beside the idle client' if args.idle_hog else ''}: "
          f"{'met' if met else 'NOT met'} "
          f"(page {top['page'][1]:.1f} ms, post {top['post'][1]:.1f} ms)")
    errors = [e for r in results.values() for e in r["errors"]]
    if errors:
        print(f"{len(errors)} error(s), first: {errors[:3]}")


if __name__ == "__main__":
    sys.exit(main())
