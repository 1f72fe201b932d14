"""What the parity tests share: cases generated with a fixed seed, the same every run (their
page, `tablet_page`, is in conftest.py)."""

from __future__ import annotations

from typing import Any

from hypothesis import given, seed, settings
from hypothesis.strategies import SearchStrategy

SEED = 20261206


def seeded(cases: SearchStrategy[Any], count: int) -> list[Any]:
    """`count` cases of `cases`, drawn with the fixed seed and no example database."""
    drawn: list[Any] = []

    @seed(SEED)
    @settings(max_examples=count, deadline=None, database=None)
    @given(cases)
    def collect(case: Any) -> None:
        drawn.append(case)

    collect()
    return drawn
