"""Bench: the step page and the event POST against their floors, in one run.

Measures median and p95 wall time of

  floor_page   GET of a bare route on the same app that renders base.html (logged in)
  step_page    GET /jobs/<id> of a job with 60 events
  event_post   POST /api/jobs/<id>/events, one new event on the next step (201 asserted)
  floor_write  a bare durable SQLite insert (WAL, synchronous=FULL, one commit each)

and prints the ratios step_page/floor_page and event_post/floor_write against
the target (<= 2x). The four are interleaved round by round, so machine noise
falls on all of them alike.

    .venv/bin/python bench/step_page.py [--iterations 200] [--warmup 20]
                                        [--profile] [--dir PATH]
"""

from __future__ import annotations

import argparse
import cProfile
import io
import os
import pstats
import re
import sqlite3
import statistics
import sys
import tempfile
import time
import uuid
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from flask import Flask, jsonify, render_template, request
from measuring import percentile, timed  # bench/ is on sys.path when a bench runs

from webapp import create_app, store
from webapp.station import recording
from webapp.station.library import load_shop_library
from webapp.station.scenario import load_scenario, read_scenario, scenario_path
from webapp.store import fleet, people

TARGET = 2.0
STEP_PAGE_EVENTS = 60  # job_opened + 59 recorded steps
STEP_PAGE_PROCEDURE = "bench-sixty-events"
LONG_PROCEDURE = "bench-long-run"

# Kinds in a repeating pattern: each advisory stands right before the action it guards.
PATTERN = ("check", "warning", "check", "note", "check")


# --- building the station -----------------------------------------------------------------

def _procedure_yaml(procedure_id: str, title: str, steps: int) -> str:
    """A valid shop procedure with `steps` note/check/warning steps (the last an action)."""
    lines = [
        "# Bench-only procedure: invented text, no approved data behind it.",
        f"id: {procedure_id}",
        f"title: {title}",
        "ata: 74-00",
        "kind: inspection",
        "channel: all",
        "source:",
        "  document: QT-610 Engine Maintenance Manual (bench data)",
        "  section: 74-00-00, Bench",
        "  revision: Rev 1, 2026-12-01",
        "effectivity:",
        "  engine_models: [QT-610]",
        "  exciter_types: [dc, transistorised, ac]",
        "  plug_types: [air-gap, surface-discharge]",
        "preliminary:",
        "  conditions: [Engine shut down and cool.]",
        "  tools: none",
        "  supplies: none",
        "  spares: none",
        "  safety: [Ignition exciters hold a charge that can kill after power is removed.]",
        "steps:",
    ]
    kinds = [PATTERN[i % len(PATTERN)] for i in range(steps)]
    if kinds[-1] != "check":  # an advisory needs an action after it
        kinds[-1] = "check"
    for number, kind in enumerate(kinds, start=1):
        lines += [f"  - id: s{number:03d}", f"    kind: {kind}",
                  f"    text: Bench step {number}, a {kind} with a sentence of ordinary length "
                  "so the page renders realistic text."]
        if kind == "check" and number % 10 == 0:
            lines += ["    items:", "      - First item confirmed", "      - Second item confirmed"]
        elif kind == "check" and number % 7 == 0:
            lines += ["    detail: A line of detail under the step, as real procedures carry."]
    lines += ["after_completion: none", ""]
    return "\n".join(lines)


def _event_for(step: Any) -> tuple[str, dict[str, Any]]:
    """The completing event kind and data for a note/check/warning step."""
    if step.kind in ("warning", "caution"):
        return "acknowledged", {}
    items = getattr(step, "items", None)
    return "step_done", ({"items": list(range(len(items)))} if items else {})


def build_station(tmp: Path, long_steps: int) -> dict[str, Any]:
    db_path = tmp / "station.db"
    library = tmp / "library"
    library.mkdir()
    (library / f"{STEP_PAGE_PROCEDURE}.yaml").write_text(
        _procedure_yaml(STEP_PAGE_PROCEDURE, "Bench procedure with sixty events",
                        STEP_PAGE_EVENTS + 10), encoding="utf-8")
    (library / f"{LONG_PROCEDURE}.yaml").write_text(
        _procedure_yaml(LONG_PROCEDURE, "Bench procedure for a long run of posts",
                        long_steps), encoding="utf-8")
    now = datetime.now(UTC)
    db = store.create(db_path)
    try:
        load_shop_library(db, now)
        loaded = load_shop_library(db, now, [library])
        assert sorted(loaded) == sorted([STEP_PAGE_PROCEDURE, LONG_PROCEDURE]), loaded
        load_scenario(db, read_scenario(scenario_path()), now)
        mech = people.person_by_username(db, "mech1")
        assert mech is not None
        engine_id = fleet.fleet(db)[0]["engines"][0]["id"]
        page_job = recording.open_job(db, procedure_id=STEP_PAGE_PROCEDURE,
                                      engine_id=engine_id, channel=None, person=mech, now=now)
        for _ in range(STEP_PAGE_EVENTS - 1):
            nxt = recording.load_job(db, page_job).state.next_step
            assert nxt is not None
            kind, data = _event_for(nxt.step)
            outcome = recording.record_event(db, page_job, event_id=str(uuid.uuid4()),
                                             kind=kind, step_id=nxt.id, data=data,
                                             device_time=None, person=mech, now=now)
            assert outcome.status == "stored", outcome
        assert recording.load_job(db, page_job).head["seq"] == STEP_PAGE_EVENTS
        post_job = recording.open_job(db, procedure_id=LONG_PROCEDURE, engine_id=engine_id,
                                      channel=None, person=mech, now=now)
    finally:
        db.close()
    return {"db_path": db_path, "page_job": page_job, "post_job": post_job}


# --- the app and its client ---------------------------------------------------------------

_META_CSRF = re.compile(r'<meta name="csrf-token" content="([^"]+)"')
_FORM_CSRF = re.compile(r'name="csrf_token"[^>]*value="([^"]+)"')


def make_app(db_path: Path) -> Flask:
    app = create_app({"DB_PATH": str(db_path), "SECRET_KEY": "bench", "TESTING": False})

    def floor() -> Any:
        # base.html with static content; the person comes from the app's context processor.
        return render_template("base.html")

    def bare_post() -> Any:
        # The framework's share of a write: session, CSRF check, JSON in and out, no work.
        return jsonify({"received": len(request.get_json()["id"])}), 201

    app.add_url_rule("/_bench/floor", "bench_floor", floor)
    app.add_url_rule("/_bench/post", "bench_post", bare_post, methods=["POST"])
    return app


def log_in(client: Any) -> str:
    page = client.get("/login").get_data(as_text=True)
    form_token = _FORM_CSRF.search(page) or _META_CSRF.search(page)
    assert form_token, "no csrf token on the log-in page"
    response = client.post("/login", data={"csrf_token": form_token.group(1),
                                           "username": "mech1", "password": "demo-mech1"})
    assert response.status_code == 303, response.status_code
    page = client.get("/fleet").get_data(as_text=True)
    token = _META_CSRF.search(page)
    assert token, "no csrf-token meta after log-in"
    return token.group(1)


# --- measuring ----------------------------------------------------------------------------

def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--iterations", type=int, default=200, help="timed rounds (default 200)")
    parser.add_argument("--warmup", type=int, default=20, help="untimed rounds first (default 20)")
    parser.add_argument("--dir", type=Path, default=None,
                        help="put the temporary station here (default: the system temp dir); "
                             "the write floor shares its file system")
    parser.add_argument("--profile", action="store_true",
                        help="after timing, profile extra step-page GETs and event POSTs")
    args = parser.parse_args(argv)
    if args.iterations < 2 or args.warmup < 0:
        parser.error("--iterations must be at least 2, --warmup at least 0")

    profile_rounds = 100 if args.profile else 0
    long_steps = args.warmup + args.iterations + profile_rounds + 5
    args.long_steps = long_steps

    with tempfile.TemporaryDirectory(prefix="sparkward-bench-", dir=args.dir) as tmpname:
        tmp = Path(tmpname)
        # Keep the bench hermetic: no instance file from the working directory.
        os.environ["SPARKWARD_INSTANCE"] = str(tmp / "instance")
        os.environ.pop("SPARKWARD_DB", None)
        built = build_station(tmp, long_steps)
        app = make_app(built["db_path"])
        client = app.test_client()
        token = log_in(client)
        page_url = f"/jobs/{built['page_job']}"
        post_url = f"/api/jobs/{built['post_job']}/events"

        # The long job's steps, in order, with the event each one takes.
        with app.app_context():
            long_db = store.connect(built["db_path"])
            steps = recording.load_job(long_db, built["post_job"]).state.steps
            long_db.close()
        plan = [(s.id, *_event_for(s.step)) for s in steps]
        cursor = iter(plan)

        floor_conn = sqlite3.connect(str(tmp / "floor.db"), isolation_level=None)
        assert floor_conn.execute("PRAGMA journal_mode=WAL").fetchone()[0] == "wal"
        floor_conn.execute("PRAGMA synchronous=FULL")
        floor_conn.execute("create table t (id integer primary key, uuid text not null, "
                           "payload text not null, at text not null)")

        def floor_page() -> None:
            r = client.get("/_bench/floor")
            assert r.status_code == 200, r.status_code
            r.get_data()

        def step_page() -> None:
            r = client.get(page_url)
            assert r.status_code == 200, r.status_code
            r.get_data()

        def event_post() -> None:
            step_id, kind, data = next(cursor)
            r = client.post(post_url, json={"id": str(uuid.uuid4()), "kind": kind,
                                            "step": step_id, "data": data},
                            headers={"X-CSRFToken": token})
            assert r.status_code == 201, (r.status_code, r.get_data(as_text=True))

        def bare_post() -> None:
            r = client.post("/_bench/post", json={"id": str(uuid.uuid4()), "kind": "step_done",
                                                  "step": "x", "data": {}},
                            headers={"X-CSRFToken": token})
            assert r.status_code == 201, r.status_code

        def floor_write() -> None:
            floor_conn.execute("BEGIN")
            floor_conn.execute("insert into t (uuid, payload, at) values (?, ?, ?)",
                               [str(uuid.uuid4()), '{"kind": "step_done"}',
                                datetime.now(UTC).isoformat()])
            floor_conn.execute("COMMIT")

        # Sanity: the step page is the 60-event job's page, the floor renders the header.
        body = client.get(page_url).get_data(as_text=True)
        assert f"{STEP_PAGE_EVENTS - 1} of {STEP_PAGE_EVENTS + 10} steps done" in body
        assert 'data-testid="who"' in client.get("/_bench/floor").get_data(as_text=True)

        benches: dict[str, Callable[[], None]] = {
            "floor_page": floor_page, "step_page": step_page,
            "event_post": event_post, "floor_write": floor_write, "bare_post": bare_post}
        names = list(benches)
        samples: dict[str, list[float]] = {n: [] for n in names}
        started = time.perf_counter()
        for round_no in range(args.warmup + args.iterations):
            # Rotate the order each round so no bench always follows the same one.
            shift = round_no % len(names)
            for name in names[shift:] + names[:shift]:
                elapsed = timed(benches[name])
                if round_no >= args.warmup:
                    samples[name].append(elapsed)
        wall = time.perf_counter() - started

        report(samples, args, wall)

        if args.profile:
            profile(client, step_page, event_post, profile_rounds)
        floor_conn.close()
    return 0


def report(samples: dict[str, list[float]], args: argparse.Namespace, wall: float) -> None:
    stats = {n: (statistics.median(v) * 1000, percentile(v, 0.95) * 1000)
             for n, v in samples.items()}
    print(f"Sparkward bench: {args.iterations} timed rounds after {args.warmup} warm-up, "
          f"interleaved ({wall:.1f} s)")
    first = args.warmup + 2  # job_opened, then the warm-up events, then the first timed one
    print(f"step page: GET of a job with {STEP_PAGE_EVENTS} events ({STEP_PAGE_EVENTS + 10} "
          "steps)")
    print(f"event POST: one new event per round on a {args.long_steps}-step job (timed POSTs "
          f"store events {first}..{first + args.iterations - 1}); 201 asserted")
    print()
    print(f"{'measure':<14}{'median ms':>11}{'p95 ms':>10}")
    for name, (med, p95) in stats.items():
        print(f"{name:<14}{med:>11.3f}{p95:>10.3f}")
    print()
    print(f"{'ratio':<26}{'median':>8}{'p95':>8}  target  met (median / p95)")
    for label, num, den in (("step_page / floor_page", "step_page", "floor_page"),
                            ("event_post / floor_write", "event_post", "floor_write")):
        rm = stats[num][0] / stats[den][0]
        rp = stats[num][1] / stats[den][1]
        met = " / ".join("yes" if r <= TARGET else "NO" for r in (rm, rp))
        print(f"{label:<26}{rm:>7.2f}x{rp:>7.2f}x  <= {TARGET:.0f}x  {met}")
    # Not a target: how much of the event POST is the framework, how much is ours.
    own = stats["event_post"][0] - stats["bare_post"][0]
    print(f"\nbare_post is a logged-in JSON POST with its CSRF check that does no work; the "
          f"event POST spends {own:.3f} ms (median) beyond it, "
          f"{own / stats['floor_write'][0]:.2f}x the durable write floor.")


def profile(client: Any, step_page: Callable[[], None], event_post: Callable[[], None],
            rounds: int) -> None:
    for title, fn in (("step page", step_page), ("event post", event_post)):
        prof = cProfile.Profile()
        prof.enable()
        for _ in range(rounds):
            fn()
        prof.disable()
        out = io.StringIO()
        st = pstats.Stats(prof, stream=out)
        st.sort_stats("cumulative").print_stats(35)
        print(f"\n=== profile: {title}, {rounds} requests, by cumulative time ===")
        print(out.getvalue())
        out = io.StringIO()
        pstats.Stats(prof, stream=out).sort_stats("tottime").print_stats(20)
        print(f"=== profile: {title}, by own time ===")
        print(out.getvalue())


if __name__ == "__main__":
    sys.exit(main())
