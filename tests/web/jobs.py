"""Driving a job through the JSON API in web tests: open it, post events, walk its steps."""

from __future__ import annotations

import uuid

from webapp.station import demo_jobs, recording
from webapp.store import instruments as register
from webapp.store import jobs as job_store

DEMO_101_ENGINE_1 = 1  # DC exciters, surface-discharge plugs (demo data)
ACKED = ("warning", "caution")


def _event(step, kind="step_done", **data):
    return {"id": str(uuid.uuid4()), "kind": kind, "step": step, "data": data}


def exciter_removed(client, db, clock, channel="A", engine=DEMO_101_ENGINE_1):
    """An exciter removal worked up to its signatures (the unit is off, its position empty,
    the channel's input and lead disconnected, tags T-1 and T-2 hanging): an installation
    can follow on that channel."""
    removal = Job(client, db, clock, "exciter-removal", channel=channel, engine=engine)
    removal.walk_to("performer")
    return removal


def functional_check_counted(mech1, mech2, db, clock, until="sign-selector"):
    """A functional check walked by mech1 with mech2 at the engine counting the snaps with
    both channels on (so both did work on it), up to `until`."""
    job = Job(mech1, db, clock, "ignition-functional-check", channel=None)
    job.walk_to("count-both")
    job.count("count-both", method="timed", count=70, window_s=30,
              client=mech2)  # demo check count, as the job walk's
    job.walk_to(until)
    return job


class Job:
    """One job driven through the API, with the station's clock at hand."""

    def __init__(self, client, db, clock, procedure, channel="A", engine=DEMO_101_ENGINE_1):
        self.client, self.db, self.clock = client, db, clock
        answer = client.post_json("/api/jobs", {"procedure": procedure, "engine": engine,
                                                "channel": channel})
        assert answer.status_code == 201, answer.get_json()
        self.id = answer.get_json()["id"]
        self.url = f"/api/jobs/{self.id}/events"

    def state(self):
        return self.client.get(f"/api/jobs/{self.id}").get_json()

    def post(self, body, client=None):
        return (client or self.client).post_json(self.url, body)

    def ok(self, body, client=None):
        answer = self.post(body, client)
        assert answer.status_code == 201, answer.get_json()
        return answer

    def refused(self, body, rule, client=None):
        before = (len(job_store.events(self.db, self.id)),
                  len(job_store.refusals(self.db, self.id)))
        answer = self.post(body, client)
        assert answer.status_code == 409, answer.get_json()
        assert answer.get_json()["rule"] == rule, answer.get_json()
        after = (len(job_store.events(self.db, self.id)),
                 len(job_store.refusals(self.db, self.id)))
        assert after == (before[0], before[1] + 1)  # only the refusal is kept
        return answer.get_json()

    def start_count(self, step_id, client=None):
        """Start a spark count's window (or tapping) on the station."""
        return self.ok(_event(step_id, "count_started"), client)

    def count(self, step_id, client=None, **data):
        """A spark count as the tablet sends it: the window started on the station, the
        station's clock moved on by the window (or the taps' span), then the count."""
        self.start_count(step_id, client)
        taps = data.get("taps")
        span = (float(taps[-1]) - float(taps[0])) if taps else float(data.get("window_s", 0))
        data.setdefault("supply", demo_jobs.demo_supply(self.db, self.id))
        self.clock.advance(span)
        return self.ok(_event(step_id, "sparks_counted", **data), client)

    def _demo_reading(self, step_id):
        """The demo's in-limits reading for a step (the one the demo jobs record)."""
        state = recording.load_job(self.db, self.id).state
        return demo_jobs.reading_data(state.step(step_id).step, state,
                                      demo_jobs.engine_totals(self.db, self.id),
                                      register.all_instruments(self.db), self.clock().date())

    def step_status(self, step_id):
        return next(s["status"] for s in self.state()["steps"] if s["id"] == step_id)

    def walk_to(self, step_id, tags=("T-1", "T-2")):
        """Complete the simple steps in order up to (not including) `step_id`."""
        for step in self.state()["steps"]:
            if step["id"] == step_id:
                return
            if step["status"] == "done":
                continue
            if step["kind"] in ACKED:
                self.ok(_event(step["id"], "acknowledged"))
            elif step["kind"] == "lockout" and step["action"] == "apply":
                for breaker, tag in zip(step["breakers"], tags, strict=False):
                    self.ok(_event(step["id"], "breaker_tagged", breaker=breaker, tag=tag))
                self.ok(_event(step["id"]))
            elif step["kind"] == "discharge_wait":
                self.clock.advance(120)
                self.ok(_event(step["id"]))
            elif step["kind"] == "part":
                job = recording.load_job(self.db, self.id)
                self.ok(_event(step["id"], "part_recorded", **demo_jobs.part_data(
                    self.db, self.id, job.state.step(step["id"]).step)))
            elif step["kind"] in ("reading", "torque"):
                while self.step_status(step["id"]) != "done":   # a torque: each fastener
                    self.ok(_event(step["id"], "reading_recorded",
                                   **self._demo_reading(step["id"])))
            elif step["kind"] == "ignition_run":
                self.clock.advance(1500)  # past any duty-cycle off period (23 min at most)
                self.ok(_event(step["id"], "energised"))
            elif step["kind"] == "spark_count":
                count = 70 if step["id"].endswith("both") else 36  # demo check counts
                self.count(step["id"], method="timed", count=count,
                           window_s=30)
            else:
                self.ok(_event(step["id"], items=list(range(len(step.get("items", []))))))
        raise AssertionError(f"{step_id} is not a step of this job")
