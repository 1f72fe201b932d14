"""Driving a job through the JSON API in web tests: open it, post events, walk its steps."""

from __future__ import annotations

import uuid

from webapp.store import jobs as job_store

DEMO_101_ENGINE_1 = 1  # DC exciters, surface-discharge plugs (demo data)
ACKED = ("warning", "caution")


def _event(step, kind="step_done", **data):
    return {"id": str(uuid.uuid4()), "kind": kind, "step": step, "data": data}


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
            elif step["kind"] in ("reading", "torque"):
                self.ok(_event(step["id"], "reading_recorded", **good_reading(step)))
            elif step["kind"] == "ignition_run":
                self.clock.advance(1500)  # past any duty-cycle off period (23 min at most)
                self.ok(_event(step["id"], "energised"))
            elif step["kind"] == "spark_count":
                count = 70 if step["id"].endswith("both") else 36  # demo check counts
                self.ok(_event(step["id"], "sparks_counted", method="timed", count=count,
                               window_s=30))
            else:
                self.ok(_event(step["id"], items=list(range(len(step.get("items", []))))))
        raise AssertionError(f"{step_id} is not a step of this job")


def good_reading(step: dict) -> dict:
    """A reading inside the step's limits, in the step's own unit (demo values)."""
    if step["kind"] == "reading" and step["value"] == "text":
        return {"text": "XEX-1001-03 / XE-9001 (demo)"}
    if step["kind"] == "reading" and step["value"] == "pass_fail":
        return {"result": "pass"}
    low, high = step["limits"]["min"], step["limits"]["max"]
    value = (low + high) / 2 if low is not None and high is not None else (
        low * 1.5 if low is not None else high / 2)
    data: dict = {"value": str(value), "unit": step["unit"]}
    if step["kind"] == "torque":
        data.update(wrench_id="TW-017", calibration_due="2027-06-30")
    for condition in step.get("conditions", []):
        data[condition] = ({"value": "45"} if condition == "humidity" else
                           {"value": "1000", "unit": "V"} if condition == "test_voltage" else
                           {"value": "18", "unit": "degC"})
    if step.get("wear"):
        data["usage"] = {"engine_hours": 812, "starts": 760, "continuous_ignition_hours": 150}
    return data
