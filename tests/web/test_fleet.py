"""The fleet wear page over the demo station: every plug, the fast one first, charts, roles,
and a wear reading recorded through a job showing up as a new point.

The plug histories, the 1.20 mm limit and the 200 engine-hour interval are demo data, invented
(demo_scenarios/bramblecoast.yaml, tasks/igniter-plug-replacement.yaml).
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import pytest

from tests.web.jobs import DEMO_101_ENGINE_1, Job, _event, exciter_removed
from webapp.store import fleet as fleet_store

SVG = "{http://www.w3.org/2000/svg}"


def _plug(db, engine_serial: str, channel: str) -> dict:
    return next(db.query(
        "select c.* from components c join engines e on e.id = c.engine_id "
        "where c.kind = 'plug' and e.serial = ? and c.channel = ?", [engine_serial, channel]))


@pytest.fixture
def fast(db) -> dict:
    # Demo data, invented: DEMO-101 engine 1 (ESN QT6-10231) channel B wears fast.
    return _plug(db, "QT6-10231", "B")


def chart(html: str, serial: str) -> ET.Element:
    match = re.search(rf'data-testid="wear-chart-{re.escape(serial)}">(<svg.*?</svg>)', html,
                      re.S)
    assert match, f"no chart for {serial}"
    return ET.fromstring(match.group(1))


def points(root: ET.Element) -> list[ET.Element]:
    return [e for e in root.iter() if "point" in e.get("class", "").split()]


def verdict(html: str, testid: str) -> str:
    match = re.search(rf'data-testid="{testid}">(.*?)</span>\s*([^<]*)</span>', html, re.S)
    assert match, testid
    return match.group(2).strip()


def test_page_lists_every_installed_plug_and_exciter(mechanic, db):
    html = mechanic.get("/fleet/wear").get_data(as_text=True)
    plugs = [r["serial"] for r in db.query(
        "select serial from components where kind = 'plug' and engine_id is not null")]
    exciters = [r["serial"] for r in db.query(
        "select serial from components where kind = 'exciter' and engine_id is not null")]
    assert len(plugs) == 16 and len(exciters) == 16  # demo: 4 aircraft × 2 engines × 2 channels
    assert sorted(re.findall(r'data-testid="plug-([^"]+)"', html)) == sorted(plugs)
    assert sorted(re.findall(r'data-testid="exciter-([^"]+)"', html)) == sorted(exciters)
    # Every plug has exactly one chart on the page (flagged ones under Needs attention).
    assert sorted(re.findall(r'data-testid="wear-chart-([^"]+)"', html)) == sorted(plugs)
    assert "XIP-1150" in html and "air-gap" in html  # DEMO-103's plugs (demo data)
    assert "advisory" in html.lower() and "gauge reading govern" in html


def test_fast_plug_comes_first_and_says_replace_now(mechanic, fast):
    html = mechanic.get("/fleet/wear").get_data(as_text=True)
    flagged = re.findall(r'data-testid="attention-([^"]+)"', html)
    assert flagged[0] == fast["serial"]
    # Hand computation: Theil–Sen slope 0.00146 mm/FH over 0.22/0.41/0.71/1.02 mm at
    # 210/405/600/790 FH leaves (1.20 − 1.02) / 0.00146 ≈ 123 FH < 200 FH to the next inspection.
    assert verdict(html, f"attention-verdict-{fast['serial']}") == "replace now"
    assert verdict(html, f"verdict-{fast['serial']}") == "replace now"
    assert html.index(f'data-testid="attention-{fast["serial"]}"') < html.index(
        'id="fleet-heading"')


def test_ordinary_plug_is_ok_to_next_inspection(mechanic, db):
    plug = _plug(db, "QT6-10231", "A")
    html = mechanic.get("/fleet/wear").get_data(as_text=True)
    # Demo data: about 0.035 mm per 100 FH, so ~0.28 mm at 800 FH leaves thousands of FH.
    assert verdict(html, f"verdict-{plug['serial']}") == "OK to next inspection"
    assert f'data-testid="attention-{plug["serial"]}"' not in html


def test_fast_plug_chart_parses_with_title_limit_and_four_points(mechanic, fast):
    root = chart(mechanic.get("/fleet/wear").get_data(as_text=True), fast["serial"])
    assert fast["serial"] in root.find(SVG + "title").text
    limits = [e for e in root.iter(SVG + "line") if e.get("class") == "limit"]
    assert len(limits) == 1
    assert "limit 1.20 mm" in [t.text for t in root.iter(SVG + "text")]
    assert len(points(root)) == 4  # demo history: 210, 405, 600, 790 FH


@pytest.mark.parametrize("username", ["mech1", "super", "trainer"])
def test_mechanics_supervisors_and_trainers_see_it(login, fast, username):
    person = login(username)
    page = person.get("/fleet/wear")
    assert page.status_code == 200
    assert 'href="/fleet/wear"' in page.get_data(as_text=True)  # the rooms bar links it
    assert person.get(f"/fleet/wear/plugs/{fast['id']}").status_code == 200


def test_admin_is_refused(login, fast):
    admin = login("admin")
    assert admin.get("/fleet/wear").status_code == 403
    assert admin.get(f"/fleet/wear/plugs/{fast['id']}").status_code == 403
    assert 'href="/fleet/wear"' not in admin.get("/admin/people").get_data(as_text=True)


def test_plug_page_is_404_for_an_unknown_id_or_a_part_that_is_not_a_plug(mechanic, db):
    assert mechanic.get("/fleet/wear/plugs/999999").status_code == 404
    exciter = next(db.query("select id from components where kind = 'exciter' limit 1"))
    assert mechanic.get(f"/fleet/wear/plugs/{exciter['id']}").status_code == 404


def test_plug_page_shows_every_point_with_its_source_and_estimate(mechanic, db, fast):
    html = mechanic.get(f"/fleet/wear/plugs/{fast['id']}").get_data(as_text=True)
    rows = re.findall(r'<tr data-testid="point-\d+">(.*?)</tr>', html, re.S)
    assert len(rows) == 4
    assert all("demo history" in r and "(counted)" in r for r in rows)  # counted in the demo
    assert "0.22 mm" in rows[0] and "1.02 mm" in rows[3]
    assert verdict(html, f"verdict-{fast['serial']}") == "replace now"
    assert len(points(chart(html, fast["serial"]))) == 4
    ordinary = _plug(db, "QT6-10231", "A")
    other = mechanic.get(f"/fleet/wear/plugs/{ordinary['id']}").get_data(as_text=True)
    # Demo data: ordinary histories carry continuous-ignition hours from operator policy.
    assert other.count("(estimated)") == 4


def test_a_wear_reading_recorded_on_a_job_adds_a_point(mechanic, db, clock, fast):
    job = Job(mechanic, db, clock, "igniter-plug-replacement", channel="B")
    job.walk_to("erosion")
    # The engine's totals as the removal step recorded them minutes before (the demo walk's).
    job.ok(_event("erosion", "reading_recorded", instrument_id="EG-011", value="1.08", unit="mm",
                  usage={"engine_hours": "812", "starts": "760",
                         "continuous_ignition_hours": "150",
                         "continuous_ignition_estimated": True}))
    html = mechanic.get(f"/fleet/wear/plugs/{fast['id']}").get_data(as_text=True)
    rows = re.findall(r'<tr data-testid="point-\d+">(.*?)</tr>', html, re.S)
    assert len(rows) == 5
    assert f"job {job.id}" in rows[4] and "1.08 mm" in rows[4] and "(estimated)" in rows[4]
    assert len(points(chart(html, fast["serial"]))) == 5
    # The plug came off at the job's removal step: the fleet page no longer lists it as
    # fitted, and its own page (above) keeps its whole history, the job's reading included.
    fleet = mechanic.get("/fleet/wear").get_data(as_text=True)
    assert f'data-testid="plug-{fast["serial"]}"' not in fleet
    assert f'data-testid="attention-{fast["serial"]}"' not in fleet
    # The other channel's plug did not gain the reading.
    other = _plug(db, "QT6-10231", "A")
    page = mechanic.get(f"/fleet/wear/plugs/{other['id']}").get_data(as_text=True)
    assert len(re.findall(r'<tr data-testid="point-\d+">', page)) == 4


def _channel_a_current_read(mechanic, db, clock):
    """A functional check that has read channel A's input current (1.9 A) on DEMO-101 1."""
    check = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    check.walk_to("count-a")
    check.count("count-a", method="timed", count=36, window_s=30)
    check.walk_to("input-current-a")
    check.ok(_event("input-current-a", "reading_recorded", instrument_id="AM-006",
                    value="1.9", unit="A"))
    return check


def test_exciter_shows_its_channels_last_functional_check_reading(mechanic, db, clock):
    _channel_a_current_read(mechanic, db, clock)
    html = mechanic.get("/fleet/wear").get_data(as_text=True)
    row = {r["channel"]: r["serial"] for r in db.query(
        "select c.channel, c.serial from components c join engines e on e.id = c.engine_id "
        "where c.kind = 'exciter' and e.serial = 'QT6-10231'")}
    cells = dict(re.findall(r'<tr data-testid="exciter-([^"]+)">(.*?)</tr>', html, re.S))
    # Demo data, invented: input current limit 2.5 A, so 1.9 A is within.
    assert "input current a: 1.9 A (within)" in " ".join(cells[row["A"]].split())
    assert "none recorded" in cells[row["B"]]  # channel B's exciter was not read


def test_plug_page_compares_the_usage_measures(mechanic, db):
    # Demo data, invented: the fast plug's wear follows continuous-ignition hours
    # (31/64/102/145 h) most closely; its rate per 100 FH is also shown.
    serial_row = next(db.query(
        "select c.id from components c join engines e on e.id = c.engine_id "
        "where e.serial = 'QT6-10231' and c.kind = 'plug' and c.channel = 'B'"))
    html = mechanic.get(f"/fleet/wear/plugs/{serial_row['id']}").get_data(as_text=True)
    assert 'data-testid="measure-starts"' in html
    assert 'data-testid="measure-continuous_ignition_hours"' in html
    block = html.split('data-testid="measure-continuous_ignition_hours"')[1].split("</tr>")[0]
    assert "yes" in block


def test_a_new_exciter_does_not_inherit_its_predecessor_s_readings(mechanic, db, clock):
    _channel_a_current_read(mechanic, db, clock)
    clock.advance(3600)
    exciter_removed(mechanic, db, clock, channel="A")
    installation = Job(mechanic, db, clock, "exciter-installation", channel="A")
    installation.walk_to("performer")   # a new serial goes on channel A
    html = mechanic.get("/fleet/wear").get_data(as_text=True)
    cells = dict(re.findall(r'<tr data-testid="exciter-([^"]+)">(.*?)</tr>', html, re.S))
    new = fleet_store.engine(db, DEMO_101_ENGINE_1)["components"]
    serial = next(c["serial"] for c in new if c["kind"] == "exciter" and c["channel"] == "A")
    assert serial.startswith("N")                     # the demo walk's new serial
    text = " ".join(cells[serial].split())
    assert "input current a" not in text              # the old unit's 1.9 A is not its
    assert f"job {installation.id}" in text           # its own installation's readings are
