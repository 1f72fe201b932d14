"""Bench: the engine's kept state against the engine's history, at several sizes.

The engine's state (fitted parts, open connections, clocks, items) is kept beside the
event log and written with each event that changes it, so neither an event that reads it
nor the engine page should grow with the engine's history. This bench gives four engines
histories of different sizes (0, then H events with an effect on the engine, across many
jobs) and measures, interleaved round by round in one run:

  record      one more event on the engine through the station's recording path (an
              effect on the engine: kept state read, checked, appended, kept state written)
  engine_page GET /fleet/engines/<id> (positions, connections, items; logged in)
  replay      rebuilding the engine's state from its whole log (what every read would cost
              without the kept value)

and prints each against the same measure on the engine with no history (ratio 1 = does
not grow). The replay column shows what the kept value saves.

    .venv/bin/python bench/engine_history.py [--sizes 100 400 1600] [--iterations 60]
"""

from __future__ import annotations

import argparse
import random
import statistics
import sys
import tempfile
import uuid
from datetime import UTC, datetime, timedelta
from pathlib import Path

from measuring import percentile, timed  # bench/ is on sys.path when a bench runs

from webapp import create_app, store
from webapp.station import recording
from webapp.station.library import load_shop_library
from webapp.station.scenario import load_scenario, read_scenario, scenario_path
from webapp.store import engines, people, procedures

PROCEDURE = "bench-engine-history"
JOB_EVENTS = 40  # events per history job: a new job every 40, as on a real engine


def _procedure_yaml(checks: int) -> str:
    """A one-channel procedure of checks that disconnect and reconnect the channel's input."""
    lines = [
        "# Bench-only procedure: invented text, no approved data behind it.",
        f"id: {PROCEDURE}", "title: Bench — input off and on", "ata: 74-00",
        "kind: inspection", "channel: one",
        "source:", "  document: QT-610 Engine Maintenance Manual (bench data)",
        "  section: 74-00-00, Bench", "  revision: Rev 1, 2026-12-01",
        "effectivity:", "  engine_models: [QT-610]",
        "  exciter_types: [dc, transistorised, ac]",
        "  plug_types: [air-gap, surface-discharge]",
        "preliminary:", "  conditions: [Engine shut down and cool.]", "  tools: none",
        "  supplies: none", "  spares: none",
        "  safety: [Ignition exciters hold a charge that can kill after power is removed.]",
        "steps:"]
    for i in range(checks):
        lines += [f"  - id: step-{i}", "    kind: check",
                  f"    text: {'Disconnect' if i % 2 == 0 else 'Reconnect'} the input.",
                  f"    {'disturbs' if i % 2 == 0 else 'restores'}: [input]"]
    lines.append("after_completion: none")
    return "\n".join(lines) + "\n"


class Station:
    def __init__(self, folder: Path, sizes: list[int], now: datetime) -> None:
        self.path = folder / "bench.db"
        db = store.create(self.path)
        load_shop_library(db, now)
        load_scenario(db, read_scenario(scenario_path()), now)
        text = _procedure_yaml(max(sizes + [JOB_EVENTS]) + 2)
        from webapp.domain.procedure_files import content_hash
        with store.writing(db):
            procedures.store_revision(db, procedure_id=PROCEDURE, title="Bench",
                                      content=text, content_hash=content_hash(text),
                                      status="approved", source_file=None, now=now)
        self.db = db
        self.now = now
        self.mech = people.person_by_username(db, "mech1")
        self.engines = {}   # history size -> (engine id, the job that takes timed events)
        for engine_id, size in zip((1, 2, 3, 4), [0, *sizes], strict=False):
            self._history(engine_id, size)
            self.engines[size] = (engine_id, self._open(engine_id))

    def _open(self, engine_id: int) -> int:
        self.now += timedelta(seconds=1)
        return recording.open_job(self.db, procedure_id=PROCEDURE, engine_id=engine_id,
                                  channel="A", person=self.mech, now=self.now)

    def record(self, job_id: int) -> None:
        """Complete the job's next step (an effect on the engine's channel A input)."""
        upcoming = recording.load_job(self.db, job_id).state.next_step
        assert upcoming is not None, "the bench job ran out of steps"
        self.now += timedelta(seconds=1)
        outcome = recording.record_event(self.db, job_id, event_id=str(uuid.uuid4()),
                                         kind="step_done", step_id=upcoming.id, data={},
                                         device_time=None, person=self.mech, now=self.now)
        assert outcome.status == "stored", outcome

    def _history(self, engine_id: int, size: int) -> None:
        done = 0
        while done < size:
            job_id = self._open(engine_id)
            for _ in range(min(JOB_EVENTS, size - done)):
                self.record(job_id)
                done += 1
            if done % 2:  # leave the input as each job found it: connected
                self.record(job_id)
                done += 1


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[100, 400, 1600])
    parser.add_argument("--iterations", type=int, default=60)
    parser.add_argument("--warmup", type=int, default=5)
    args = parser.parse_args()
    if len(args.sizes) > 3:
        parser.error("at most three sizes (the demo fleet has four DC/transistorised engines)")
    now = datetime(2026, 12, 1, 6, 0, tzinfo=UTC)
    with tempfile.TemporaryDirectory() as folder:
        station = Station(Path(folder), args.sizes, now)
        app = create_app({"DB_PATH": str(station.path), "SECRET_KEY": "bench",
                          "TESTING": False})
        client = app.test_client()
        page = client.get("/login").get_data(as_text=True)
        token = page.split('name="csrf_token" value="')[1].split('"')[0]
        client.post("/login", data={"username": "mech1", "password": "demo-mech1",
                                    "csrf_token": token})
        samples: dict[tuple[str, int], list[float]] = {}
        sizes = [0, *args.sizes]
        rng = random.Random(7)
        for round_ in range(args.warmup + args.iterations):
            work = [(m, s) for m in ("record", "engine_page", "replay") for s in sizes]
            rng.shuffle(work)
            for measure, size in work:
                engine_id, job_id = station.engines[size]
                if measure == "record":
                    took = timed(lambda j=job_id: station.record(j))
                elif measure == "engine_page":
                    took = timed(lambda e=engine_id: client.get(f"/fleet/engines/{e}"))
                else:
                    took = timed(lambda e=engine_id: engines.replay(station.db, e))
                if round_ >= args.warmup:
                    samples.setdefault((measure, size), []).append(took * 1000)
        for size in sizes:
            engine_id, _ = station.engines[size]
            kept = engines.current(station.db, engine_id)
            assert kept == engines.replay(station.db, engine_id), "kept state != replay"
    print(f"engine history: {args.iterations} rounds; history sizes are events with an "
          "effect on the engine, spread over jobs of "
          f"{JOB_EVENTS} events\n")
    print(f"{'measure':<12} {'history':>8} {'median ms':>10} {'p95 ms':>8} "
          f"{'ratio to no history (median / p95)':>36}")
    for measure in ("record", "engine_page", "replay"):
        base = samples[(measure, 0)]
        for size in sizes:
            values = samples[(measure, size)]
            ratio = (f"{statistics.median(values) / statistics.median(base):.2f}x / "
                     f"{percentile(values, 0.95) / percentile(base, 0.95):.2f}x")
            print(f"{measure:<12} {size:>8} {statistics.median(values):>10.3f} "
                  f"{percentile(values, 0.95):>8.3f} {ratio:>36}")
    print("\nrecord and engine_page read the kept state: they should not grow with the "
          "events folded; replay grows with the history it folds. The engine page also lists "
          "the engine's open jobs, and each history job here stays open (one per "
          f"{JOB_EVENTS} events), so that page grows with them, not with the events.")
    return 0


if __name__ == "__main__":
    sys.exit(main())
