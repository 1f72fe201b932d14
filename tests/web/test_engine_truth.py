"""The engine as the station's truth, through the JSON API: parts checked against what is
fitted, energising refused on a channel another job has open, and the duty-cycle clock that
follows the exciter's serial across jobs. The kept engine state equals a replay."""

from __future__ import annotations

import random
import re

import pytest

from tests.web.jobs import DEMO_101_ENGINE_1, Job, _event
from webapp.domain import gates
from webapp.domain.errors import RuleRefusal
from webapp.records.pdf import record_html
from webapp.store import engines
from webapp.store import fleet as fleet_store

USAGE = {"engine_hours": "812", "starts": "760"}


def fitted(db, kind="exciter", channel="A", engine=DEMO_101_ENGINE_1):
    return engines.current(db, engine).fitted(kind, channel)


def removal_of(db, **changes):
    part = fitted(db)
    return _event("removed-exciter", "part_recorded", **{
        "part_number": part.part_number, "serial": part.serial, "status": "unserviceable",
        "reason": "failed", "tag": "U-0042", "usage": USAGE, **changes})


def fitting(**changes):
    return _event("incoming-exciter", "part_recorded", **{
        "part_number": "XEX-1001-04", "serial": "XE-9001", "release": "DEMO-REL-7",
        "condition": "overhauled", "usage": USAGE, **changes})


@pytest.fixture
def removal(mechanic, db, clock):
    return Job(mechanic, db, clock, "exciter-removal")


def test_a_removal_records_the_fitted_serial_and_empties_the_position(removal, db, mechanic):
    removed = fitted(db)
    removal.walk_to("removed-exciter")
    removal.ok(removal_of(db))
    position = engines.current(db, DEMO_101_ENGINE_1).position("exciter", "A")
    assert position.fitted is None and position.emptied.job_id == removal.id
    engine = mechanic.get("/api/fleet").get_json()["aircraft"][0]["engines"][0]
    serials = [c["serial"] for c in engine["components"] if c["kind"] == "exciter"]
    assert removed.serial not in serials and len(serials) == 1  # channel B's only
    page = mechanic.get(f"/fleet/engines/{DEMO_101_ENGINE_1}").get_data(as_text=True)
    assert f"removed in job {removal.id}" in page and removed.serial in page


def test_a_serial_that_is_not_fitted_needs_a_finding_before_anything_else(removal, db):
    removal.walk_to("removed-exciter")
    answer = removal.ok(removal_of(db, serial="XE-7777")).get_json()
    assert answer["data"]["verdict"] == "mismatch"
    assert removal.state()["awaiting_finding"] == ["removed-exciter"]
    removal.refused(_event("performer", "signed", pin="135790"), "out_of_order")
    removal.ok(_event("removed-exciter", "finding", text="Data plate reads XE-7777; the "
                      "fleet record said otherwise", disposition="re-tested"))
    steps = [s["id"] for s in removal.state()["steps"]]
    assert removal.state()["next_step"] == steps[steps.index("removed-exciter") + 1]


def test_an_installation_refuses_a_wrong_part_number_and_a_serial_fitted_elsewhere(
        removal, db, mechanic, clock):
    removal.walk_to("removed-exciter")
    removal.ok(removal_of(db))
    installation = Job(mechanic, db, clock, "exciter-installation")
    installation.walk_to("incoming-exciter")
    refused = installation.refused(fitting(part_number="XEX-3100-02"), "part_number_not_allowed")
    assert "XEX-1001-03" in refused["reason"] and "XEX-1001-04 (alternate)" in refused["reason"]
    elsewhere = fitted(db, "exciter", "B", engine=3)  # DEMO-102 engine 1
    refused = installation.refused(fitting(serial=elsewhere.serial), "serial_fitted_elsewhere")
    assert "DEMO-102 engine 1, channel B exciter" in refused["reason"]
    problem = installation.post(fitting(release=""))
    assert problem.status_code == 422 and problem.get_json()["problems"][0]["field"] == \
        "data.release"
    installation.ok(fitting())
    assert fitted(db).serial == "XE-9001"
    component = fleet_store.component_by_serial(db, "XEX-1001-04", "XE-9001")
    assert (component["engine_id"], component["channel"]) == (DEMO_101_ENGINE_1, "A")


def _release_and_gate(check):
    """The functional check's tag release (the mechanic's own tags) and gate."""
    check.walk_to("release-tags")
    for tag in ("T-1", "T-2"):
        check.ok(_event("release-tags", "tag_removed", tag=tag))
    check.ok(_event("release-tags"))
    check.walk_to("run-a-dc")


def test_energising_is_refused_while_another_job_has_the_channel_open(removal, mechanic, db,
                                                                       clock):
    removal.walk_to("discharge")  # tags hung, the exciter's input disconnected
    check = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    _release_and_gate(check)
    clock.advance(1500)
    refused = check.refused(_event("run-a-dc", "energised"), "channel_disturbed")
    assert f"job {removal.id}, step disconnect-input" in refused["reason"]
    assert "Channel A: low-voltage input disconnected" in refused["reason"]  # as written
    assert "low-voltage input disconnected" in refused["reason"]
    page = mechanic.get(f"/jobs/{check.id}").get_data(as_text=True)
    assert 'data-testid="channel-not-whole-A"' in page
    # The job's JSON (what a tablet keeps) says the same.
    engine = check.state()["engine_state"]
    assert engine["not_whole"]["B"] == []
    assert any(f"job {removal.id}" in why for why in engine["not_whole"]["A"])


def test_the_duty_cycle_clock_carries_from_one_job_to_the_next(mechanic, db, clock):
    first = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    first.walk_to("run-a-dc")
    clock.advance(1500)
    first.ok(_event("run-a-dc", "energised"))
    clock.advance(60)
    first.ok(_event(None, "de_energised", channel="A"))
    # A second job on the same engine a minute later: channel A's exciter is still cooling
    # (demo duty cycle, invented: on 2 min, then off 3 min).
    second = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    second.walk_to("run-a-dc")
    clock.advance(60)
    refused = second.refused(_event("run-a-dc", "energised"), "duty_cycle_off")
    assert refused["seconds_remaining"] == 120  # off 60 s of the 180 s
    clock.advance(refused["seconds_remaining"])
    second.ok(_event("run-a-dc", "energised"))


def test_the_kept_engine_state_equals_a_replay_after_random_work(mechanic, db, clock):
    rng = random.Random(9)
    procedures = ["exciter-removal", "exciter-installation", "igniter-plug-replacement",
                  "ignition-lead-inspection"]
    for _ in range(6):
        job = Job(mechanic, db, clock, rng.choice(procedures), channel=rng.choice("AB"))
        steps = [s["id"] for s in job.state()["steps"] if s["kind"] != "sign"]
        try:
            job.walk_to(steps[rng.randrange(len(steps))])
        except AssertionError:
            pass  # the walk met a refusal (a part not fitted, a tag in use): that is work too
        assert engines.current(db, DEMO_101_ENGINE_1) == engines.replay(db, DEMO_101_ENGINE_1)
        clock.advance(rng.randrange(30, 900))


def _plug_change(client, db, clock, engine, channel, fitted_data):
    """A plug replacement up to its signatures: the fitted plug comes off serviceable
    (robbed), and `fitted_data` goes on."""
    job = Job(client, db, clock, "igniter-plug-replacement", channel=channel, engine=engine)
    job.walk_to("removed-plug")
    plug = fitted(db, "plug", channel, engine)
    job.ok(_event("removed-plug", "part_recorded", part_number=plug.part_number,
                  serial=plug.serial, status="serviceable", reason="robbed", tag="S-0007",
                  usage=fitted_data["usage"]))  # the engine's totals, the same minutes later
    job.walk_to("installed-plug")
    job.ok(_event("installed-plug", "part_recorded", **fitted_data))
    job.walk_to("performer")
    return job, plug


def test_a_plug_s_history_follows_its_serial_to_the_next_engine(mechanic, db, clock):
    # DEMO-101 engine 1 channel B: its plug is robbed for DEMO-102 engine 1 (same P/N).
    first, robbed = _plug_change(mechanic, db, clock, DEMO_101_ENGINE_1, "B", {
        "part_number": "XIP-2207", "serial": "XP-NEW-1", "release": "DEMO-REL-1",
        "condition": "new", "usage": {"engine_hours": "812", "starts": "760"}})
    clock.advance(3600)
    second, _ = _plug_change(mechanic, db, clock, 3, "A", {
        "part_number": robbed.part_number, "serial": robbed.serial, "release": "DEMO-REL-2",
        "condition": "serviceable used", "usage": {"engine_hours": "1500", "starts": "1410",
                                                   "continuous_ignition_hours": "40"}})
    assert fitted(db, "plug", "A", 3).serial == robbed.serial
    page = mechanic.get(f"/fleet/parts/{robbed.part_number}/{robbed.serial}").get_data(
        as_text=True)
    assert "Fitted now: DEMO-102 engine 1, channel A igniter plug" in page
    moves = re.findall(r'<tr data-testid="move-\d+">(.*?)</tr>', page, re.S)
    assert len(moves) == 2
    assert "DEMO-101 engine 1" in moves[0] and f"job {first.id}" in moves[0]
    assert "removed serviceable (robbed), tag S-0007" in moves[0]
    assert "DEMO-102 engine 1" in moves[1] and f"job {second.id}" in moves[1]
    # Demo data: the robbed plug was fitted at engine totals 10 h / 9 starts (starting
    # configuration) and came off at 812 h / 760 starts: 812 − 10 = 802 h, 760 − 9 = 751.
    assert "engine totals (from the aircraft's records) 10 engine hours, 9 starts" in moves[0]
    assert "802 engine hours, 751 starts" in moves[0]
    assert ("engine totals (from the aircraft's records) 1500 engine hours, 1410 starts"
            in moves[1] and "still fitted" in moves[1])
    # Its wear history went with it: its own plug page keeps the demo gaugings, while the
    # new plug in its old position starts with none.
    robbed_id = fleet_store.component_by_serial(db, robbed.part_number, robbed.serial)["id"]
    new_id = fleet_store.component_by_serial(db, "XIP-2207", "XP-NEW-1")["id"]
    robbed_page = mechanic.get(f"/fleet/wear/plugs/{robbed_id}").get_data(as_text=True)
    new_page = mechanic.get(f"/fleet/wear/plugs/{new_id}").get_data(as_text=True)
    assert len(re.findall(r'<tr data-testid="point-\d+">', robbed_page)) >= 4
    assert "DEMO-102" in robbed_page
    # Its gaugings were on DEMO-101's engine: not of its fit on DEMO-102, so the chart says
    # it falls back to the engine's totals.
    assert "inspections are not of this plug&#39;s latest fit" in robbed_page
    assert "engine total hours" in robbed_page
    assert re.findall(r'<tr data-testid="point-\d+">', new_page) == []
    assert "DEMO-101" in new_page


def test_a_serial_fitted_elsewhere_cannot_go_on_and_one_removed_unserviceable_needs_overhaul(
        mechanic, db, clock):
    job = Job(mechanic, db, clock, "igniter-plug-replacement", channel="A", engine=3)
    job.walk_to("removed-plug")
    plug = fitted(db, "plug", "A", 3)
    job.ok(_event("removed-plug", "part_recorded", part_number=plug.part_number,
                  serial=plug.serial, status="unserviceable", reason="failed", tag="U-9",
                  usage={"engine_hours": "1500", "starts": "1410"}))
    job.walk_to("installed-plug")
    in_use = fitted(db, "plug", "B", DEMO_101_ENGINE_1)
    refused = job.refused(_event("installed-plug", "part_recorded", part_number="XIP-2207",
                                 serial=in_use.serial, release="R", condition="new",
                                 usage=USAGE), "serial_fitted_elsewhere")
    assert "DEMO-101 engine 1, channel B igniter plug" in refused["reason"]
    again = {"part_number": plug.part_number, "serial": plug.serial, "release": "R-2",
             "usage": {"engine_hours": "1500", "starts": "1410"}}  # as at the removal
    job.refused(_event("installed-plug", "part_recorded", condition="serviceable used",
                       **again), "part_unserviceable")
    job.ok(_event("installed-plug", "part_recorded", condition="overhauled", **again))


def test_a_deferred_defect_is_an_open_item_until_a_later_job_closes_it(mechanic, db, clock,
                                                                         app):
    lead = Job(mechanic, db, clock, "ignition-lead-inspection", channel="A")
    lead.walk_to("routing-clamps")
    lead.ok(_event("routing-clamps", "reading_recorded", result="fail"))
    problem = lead.post(_event("routing-clamps", "finding", text="Clamp 4 cushion perished",
                               disposition="deferred", reference="DD-7"))
    assert problem.status_code == 422 and "data.limit" in str(problem.get_json())
    lead.ok(_event("routing-clamps", "finding", text="Clamp 4 cushion perished",
                   disposition="deferred", reference="DD-7", limit="50 FH"))
    item = engines.current(db, DEMO_101_ENGINE_1).open_items[0]
    assert (item.reference, item.limit, item.job_id) == ("DD-7", "50 FH", lead.id)
    # Shown on the engine page and on a later job on the engine.
    later = Job(mechanic, db, clock, "exciter-removal", channel="B")
    assert 'data-testid="open-item-DD-7"' in mechanic.get(
        f"/fleet/engines/{DEMO_101_ENGINE_1}").get_data(as_text=True)
    assert 'data-testid="job-open-item-DD-7"' in mechanic.get(
        f"/jobs/{later.id}").get_data(as_text=True)
    # Closing it needs what was done; an unknown item is refused.
    later.refused(_event(None, "item_closed", item="no-such-item", how="x"), "no_such_item")
    assert later.post(_event(None, "item_closed", item=item.id, how=" ")).status_code == 422
    later.ok(_event(None, "item_closed", item=item.id, how="Cushion replaced, WO 88"))
    assert engines.current(db, DEMO_101_ENGINE_1).open_items == ()
    with app.app_context():   # the closing job's record says what it closed and how
        html = record_html(db, later.id, clock(), embedded=True)
    closed = html.split('data-testid="items-closed"')[1].split("</table>")[0]
    assert "open item DD-7: Clamp 4 cushion perished" in closed
    assert "Cushion replaced, WO 88" in closed
    assert engines.current(db, DEMO_101_ENGINE_1) == engines.replay(db, DEMO_101_ENGINE_1)


def test_a_kept_state_of_an_older_format_is_rebuilt_not_read(removal, db):
    removal.walk_to("input-first")   # tags T-1 and T-2 hang
    replayed = engines.replay(db, DEMO_101_ENGINE_1)
    assert set(replayed.tags) == {"T-1", "T-2"}
    # A station upgraded from a layout without tags in the kept value: never read as "none".
    db.execute("update engine_state set state = ? where engine_id = ?",
               ['{"format": 1, "positions": {}, "disturbed": [], "clocks": {}, '
                '"removed": [], "open_items": []}', DEMO_101_ENGINE_1])
    assert engines.current(db, DEMO_101_ENGINE_1) == replayed


def test_a_plate_naming_a_serial_fitted_elsewhere_leaves_the_other_engine_s_record(removal,
                                                                                   db):
    elsewhere = fitted(db, "exciter", "B", engine=3)   # DEMO-102 engine 1
    removal.walk_to("removed-exciter")
    answer = removal.ok(removal_of(db, serial=elsewhere.serial)).get_json()
    assert answer["data"]["verdict"] == "mismatch"     # a finding must follow
    # This position is empty; the other engine's record is not changed from here.
    assert fitted(db) is None
    assert fitted(db, "exciter", "B", engine=3) == elsewhere
    row = fleet_store.component_by_serial(db, elsewhere.part_number, elsewhere.serial)
    assert (row["engine_id"], row["channel"]) == (3, "B")


def test_a_hot_exciter_moved_to_another_engine_keeps_its_off_time(mechanic, db, clock):
    # DEMO-101 engine 2 channel A is emptied first (its exciter off for repair).
    Job(mechanic, db, clock, "exciter-removal", channel="A", engine=2).walk_to("performer")
    # Engine 1's channel A exciter runs one minute (demo duty cycle, invented: on 2 min,
    # then off 3 min), then comes off, robbed for engine 2, within its off time.
    check = Job(mechanic, db, clock, "ignition-functional-check", channel=None)
    check.walk_to("run-a-dc")
    check.ok(_event("run-a-dc", "energised"))
    clock.advance(60)
    check.ok(_event(None, "de_energised", channel="A"))
    hot = fitted(db)
    removal = Job(mechanic, db, clock, "exciter-removal", channel="A")
    removal.walk_to("removed-exciter")          # the walk waits out the 2 min discharge
    removal.ok(removal_of(db, status="serviceable", reason="robbed"))
    installation = Job(mechanic, db, clock, "exciter-installation", channel="A", engine=2)
    installation.walk_to("incoming-exciter")
    installation.ok(fitting(part_number=hot.part_number, serial=hot.serial,
                            condition="serviceable used"))
    moved = engines.current(db, 2).clock_for("A")
    assert moved == engines.current(db, DEMO_101_ENGINE_1).clocks[hot.serial]
    assert moved.runs == 1 and moved.off_remaining_s(clock()) == 60   # 180 s - 120 s
    with pytest.raises(RuleRefusal) as refused:
        gates.check_energise({"A": moved}, ["A"], clock(), None)
    assert refused.value.rule == "duty_cycle_off"
    assert engines.current(db, 2) == engines.replay(db, 2)
