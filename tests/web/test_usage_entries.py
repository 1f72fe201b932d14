"""The engine's usage totals through the JSON API, as a tablet sends them: entries that
cannot follow the engine's last entry are refused with both sets of figures and nothing is
stored; an honest late sync is taken; no page, chart or record calls engine hours "FH" or
flight hours.

The job: igniter plug replacement on DEMO-101 engine 1, channel B (demo data). Its removal
step enters the demo walk's totals, 812 engine hours, 760 starts, 150 continuous-ignition
hours (invented), the engine's first entry on the station.
"""

from __future__ import annotations

import io
import re
from datetime import timedelta

import pytest
from pypdf import PdfReader

from tests.web.jobs import DEMO_101_ENGINE_1, Job, _event
from webapp.records import pdf
from webapp.store import engines
from webapp.store import jobs as job_store


def _erosion(hours, starts=760, ci=150, **extra):
    return {**_event("erosion", "reading_recorded", instrument_id="EG-011", value="0.60", unit="mm",
                     usage={"engine_hours": hours, "starts": starts,
                            "continuous_ignition_hours": ci}), **extra}


@pytest.fixture
def at_erosion(mechanic, db, clock):
    """The job at its wear reading, the plug's removal having entered 812 h / 760 starts."""
    job = Job(mechanic, db, clock, "igniter-plug-replacement", channel="B",
              engine=DEMO_101_ENGINE_1)
    job.walk_to("erosion")
    last = engines.current(db, DEMO_101_ENGINE_1).usage
    assert (last.engine_hours, last.starts, last.step_id) == (812.0, 760, "removed-plug")
    return job


def test_totals_below_the_last_entry_are_refused_and_nothing_is_stored(at_erosion, db, clock):
    kept = engines.current(db, DEMO_101_ENGINE_1)
    refused = at_erosion.refused(_erosion(800), "usage_backwards")  # only the refusal kept
    when = f"{clock():%Y-%m-%d}"
    assert refused["reason"].startswith(
        f"Engine hours 800.0 is below the last entry 812.0 (job {at_erosion.id}, {when} ")
    assert (refused["entered"], refused["last"]) == (800.0, 812.0)
    refused = at_erosion.refused(_erosion(812, starts=759), "usage_backwards")
    assert "Starts 759 is below the last entry 760" in refused["reason"]
    assert engines.current(db, DEMO_101_ENGINE_1) == kept
    assert not [e for e in job_store.events(db, at_erosion.id) if e["step_id"] == "erosion"]
    at_erosion.ok(_erosion(812))


def test_a_rise_beyond_the_time_elapsed_is_refused(at_erosion, db, clock):
    clock.advance(3600)
    # About an hour since the removal's entry: 812 → 815 h is 3 h of running, refused;
    # 812 → 812.9 h fits in the time that passed.
    refused = at_erosion.refused(_erosion(815), "usage_implausible_rise")
    assert "engine hours rose by 3.0 but at most 1.0 hours of clock time passed" in (
        refused["reason"])
    assert "engine hours 812.0, starts 760, continuous-ignition hours 150.0" in (
        refused["reason"])  # the last entry's figures
    refused = at_erosion.refused(_erosion(812.9, ci=152), "usage_implausible_rise")
    assert "continuous-ignition hours rose by 2.0 but engine hours only by 0.9" in (
        refused["reason"])
    at_erosion.ok(_erosion(812.9, ci=150.8))
    assert engines.current(db, DEMO_101_ENGINE_1).usage.engine_hours == 812.9


def test_continuous_ignition_above_the_engine_total_is_a_bad_field(at_erosion, db):
    before = len(job_store.events(db, at_erosion.id))
    answer = at_erosion.post(_erosion(812, ci=900))
    assert answer.status_code == 422
    assert answer.get_json()["problems"][0]["field"] == "data.continuous_ignition_hours"
    assert "900.0" in answer.get_json()["reason"] and "812.0" in answer.get_json()["reason"]
    assert len(job_store.events(db, at_erosion.id)) == before


def test_an_offline_entry_of_earlier_lower_totals_syncs_without_replacing_the_last(
        at_erosion, db, clock):
    # Read two hours before the removal's entry on a tablet that was offline, sent now.
    made = clock() - timedelta(hours=2)
    at_erosion.ok(_erosion(810.5, starts=758, ci=149.5, device_time=made.isoformat()))
    last = engines.current(db, DEMO_101_ENGINE_1).usage
    assert (last.engine_hours, last.step_id) == (812.0, "removed-plug")
    assert engines.current(db, DEMO_101_ENGINE_1) == engines.replay(db, DEMO_101_ENGINE_1)


# "FH" as a word, or flight hours in any case: engine hours must never be called that.
WRONG_UNIT = re.compile(r"\bFH\b|flight[ -]hours?", re.I)


def test_no_page_chart_or_record_calls_engine_hours_flight_hours(app, at_erosion, mechanic,
                                                                  db, clock):
    seen = {}
    seen["step page (wear reading)"] = mechanic.get(f"/jobs/{at_erosion.id}").get_data(
        as_text=True)
    assert "Engine total hours (from the aircraft&#39;s records)" in (
        seen["step page (wear reading)"])
    at_erosion.ok(_erosion(812))
    at_erosion.walk_to("installed-plug")
    seen["step page (part)"] = mechanic.get(f"/jobs/{at_erosion.id}").get_data(as_text=True)
    assert "The engine's last entry: 812.0 engine hours" in seen["step page (part)"]
    plug = next(db.query("select id, part_number, serial from components where serial = ?",
                         [engines.current(db, DEMO_101_ENGINE_1).fitted("plug", "A").serial]))
    seen["fleet wear"] = mechanic.get("/fleet/wear").get_data(as_text=True)
    seen["plug page"] = mechanic.get(f"/fleet/wear/plugs/{plug['id']}").get_data(as_text=True)
    seen["part page"] = mechanic.get(f"/fleet/parts/{plug['part_number']}/{plug['serial']}"
                                     ).get_data(as_text=True)
    seen["API doc"] = mechanic.get("/api/openapi.json").get_data(as_text=True)
    with app.app_context():
        data, _ = pdf.render_for_signing(db, at_erosion.id, clock(), [])
    record = " ".join(" ".join(p.extract_text() for p in PdfReader(io.BytesIO(data)).pages)
                      .split())
    seen["record"] = record   # the procedure's own step texts included
    for where, text in seen.items():
        assert not WRONG_UNIT.search(text), (where, WRONG_UNIT.search(text))
    # The units are named, not left out: the chart's axis and the record's usage.
    assert "engine hours since fitted" in seen["fleet wear"]
    assert "812 engine hours" in seen["record"]


def test_the_check_for_the_wrong_unit_name_can_fail():
    assert WRONG_UNIT.search("next inspection in 200 FH")
    assert WRONG_UNIT.search("Flight hours")
    assert not WRONG_UNIT.search("FHA-2 engine hours")
