"""The rules the tablet applies offline (static/js/tablet_job.js) give the station's own
verdicts and words (webapp/domain), case for case, in real Chromium: generated tag entries
against generated hanging tags, and step completions, each judged by both."""

from __future__ import annotations

import json

import pytest
from hypothesis import strategies as st

from webapp.domain import gates
from webapp.domain.errors import RuleRefusal
from webapp.domain.procedures import Lockout

from .parity import seeded

JOB, ME = 7, 1
NAMES = {1: "Aino Varga", 2: "Tomas Reyes"}  # demo names (invented)
HUNG_AT = "2026-12-01T08:04:09+00:00"
BREAKERS = ["IGN-A", "IGN-B", "IGN-C"]
numbers = st.sampled_from(["T-1", "T-2", " T-1 ", "T-3", "", "   ", "X" * 24, "X" * 25])
# (number, breaker, job, confirmed here, owner, hung by)
hanging = st.lists(st.tuples(st.sampled_from(["T-1", "T-2", "T-3", "T-4"]),
                             st.sampled_from(BREAKERS), st.sampled_from([JOB, 8]),
                             st.booleans(), st.sampled_from([1, 2]), st.sampled_from([1, 2])),
                   max_size=4, unique_by=lambda t: t[0])
cases = st.tuples(hanging, st.sampled_from(BREAKERS[:2]), numbers, st.booleans())


def _station_says(tags, breaker: str, number: str, confirm: bool) -> str | None:
    step = Lockout(id="breakers", kind="lockout", text="Tag them.", confirm_existing=confirm,
                   breakers=[{"id": b, "label": b} for b in BREAKERS[:2]])
    held = {n: gates.Tag(number=n, breaker=b, owner_id=owner, job_id=job, applied_by=hung_by,
                         applied_at=HUNG_AT, owner_since=HUNG_AT,
                         confirmed_in=frozenset({JOB}) if confirmed else frozenset())
            for n, b, job, confirmed, owner, hung_by in tags}
    try:
        gates.check_breaker_tagged(step, {"breaker": breaker, "tag": number}, held, JOB,
                                   person_id=ME, names=NAMES)
    except RuleRefusal as refusal:
        return refusal.reason
    return None


def _as_carried(tags) -> list[dict]:
    """The tags as web/carry.py gives them to the tablet."""
    return [{"breaker": b, "number": n, "owner": NAMES[owner], "mine": owner == ME,
             "counts_here": job == JOB or confirmed, "this_job": job == JOB, "job_id": job,
             "applied_by": NAMES[hung_by], "applied_by_me": hung_by == ME,
             "applied_at": HUNG_AT}
            for n, b, job, confirmed, owner, hung_by in tags]


@pytest.mark.browser
def test_the_tablets_tag_rules_give_the_stations_verdicts_in_its_words(tablet_page):
    generated = seeded(cases, 300)
    judged = tablet_page.evaluate(
        """cases => cases.map(([tags, breaker, number, confirm]) =>
             window.sparkwardTabletJob.rules.tagRefusal(
               { tags: tags }, { confirm_existing: confirm }, breaker, number))""",
        [[_as_carried(tags), breaker, number, confirm]
         for tags, breaker, number, confirm in generated])
    differ = [(case, tablet, _station_says(*case)) for case, tablet in zip(generated, judged,
                                                                          strict=True)
              if tablet != _station_says(*case)]
    assert differ == [], json.dumps(differ[:3], indent=1)
    assert any(v is None for v in judged) and any(v for v in judged)  # both outcomes met


@pytest.mark.browser
def test_a_lockout_counts_as_done_on_the_tablet_exactly_when_the_station_would_pass_it(
        tablet_page):
    step = Lockout(id="breakers", kind="lockout", text="Tag them.",
                   breakers=[{"id": b, "label": b} for b in BREAKERS[:2]])
    for tags in ([], [("T-1", "IGN-A", JOB, False, 1, 1)],
                 [("T-1", "IGN-A", JOB, False, 1, 1), ("T-2", "IGN-B", 8, False, 2, 2)],
                 [("T-1", "IGN-A", JOB, False, 1, 1), ("T-2", "IGN-B", 8, True, 2, 2)],
                 [("T-1", "IGN-A", 8, True, 2, 2), ("T-2", "IGN-B", JOB, False, 2, 1)]):
        held = {n: gates.Tag(number=n, breaker=b, owner_id=o, job_id=job, applied_by=h,
                             applied_at=HUNG_AT, owner_since=HUNG_AT,
                             confirmed_in=frozenset({JOB}) if c else frozenset())
                for n, b, job, c, o, h in tags}
        station = gates.lockout_complete(step, held, JOB)
        tablet = tablet_page.evaluate(
            "([tags, breakers]) => window.sparkwardTabletJob.rules.breakersLeft("
            "{ tags: tags }, { breakers: breakers })",
            [_as_carried(tags), [{"id": b, "label": b} for b in BREAKERS[:2]]])
        assert tablet == station, tags
