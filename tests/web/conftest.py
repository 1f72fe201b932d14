"""Fixtures shared by the web tests."""

from __future__ import annotations

import pytest

from tests.web.jobs import Job, exciter_removed


@pytest.fixture
def installation(mechanic, db, clock):
    """An exciter installation walked to its mounting torque (four named bolts, demo data),
    after a removal emptied channel A."""
    exciter_removed(mechanic, db, clock)
    job = Job(mechanic, db, clock, "exciter-installation")
    job.walk_to("mounting-torque")
    return job
