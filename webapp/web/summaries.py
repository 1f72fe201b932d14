"""Step summaries for progress lists: rendered once per procedure revision, not per request.

A 70-step procedure's list would otherwise be most of a step page's time; the
summary of a step (number, kind label, shortened text) never changes within a
revision, so it is cached by revision hash.
"""

from __future__ import annotations

from functools import lru_cache

from flask import current_app
from jinja2.filters import do_truncate
from markupsafe import Markup, escape

from ..domain.execution import JobState


def step_summaries(revision_hash: str, state: JobState) -> dict[str, Markup]:
    """{step id: "<n>. <kind label> <text…>"} for the job's applicable steps."""
    steps = tuple((s.id, s.number, s.step.kind, s.step.text) for s in state.steps)
    return _summaries(revision_hash, steps)


@lru_cache(maxsize=128)
def _summaries(_revision_hash: str, steps: tuple[tuple[str, int, str, str], ...]
               ) -> dict[str, Markup]:
    labels = current_app.jinja_env.get_template("_labels.html").module
    env = current_app.jinja_env
    return {step_id: Markup(f"{number}. ") + labels.kind_label(kind) + Markup(" ")
            + escape(do_truncate(env, text, 70))
            for step_id, number, kind, text in steps}
