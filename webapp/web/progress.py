"""The job's progress list, rendered in Python: the step page's hottest markup.

A procedure can have seventy steps; as a Jinja loop the list was most of a step
page's time. Each step's summary (number, kind label, shortened text) is fixed
within a revision and made once per revision; each request only adds the
status mark and who did the step when. The markup matches what a template
would write: every value is escaped, state is a word and a mark, not colour.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from functools import lru_cache

from flask import current_app
from jinja2.filters import do_truncate
from markupsafe import Markup, escape

from ..domain.execution import JobState
from ..shown import reading_summary

_MARKS = {"done": ("✓", "Done:"), "next": ("▶", "Now:"), "waiting": ("○", "To do:")}


def progress_list(revision_hash: str, state: JobState, names: Mapping[int, str],
                  when: Callable[[str], str]) -> Markup:
    """The <ol> of a job's steps with their status and, for done ones, who and when."""
    summaries = _summaries(revision_hash, tuple(
        (s.id, s.number, s.step.kind, s.step.text) for s in state.steps))
    shown_names = {person: escape(name) for person, name in names.items()}
    rows = []
    for s in state.steps:
        mark, said = _MARKS[s.status]
        step_id, summary = summaries[s.id]
        meta = ""
        if s.event is not None:
            who = shown_names.get(s.event["person_id"], "?")
            at = escape(when(s.event["received_at"]))
            said_value = reading_summary(s.event.get("data") or {})
            value = f" · {escape(said_value)}" if said_value else ""
            meta = f'<span class="meta">{who} · {at}{value}</span>'
        rows.append(
            f'<li class="s-{s.status}" data-testid="progress-{step_id}" '
            f'data-status="{s.status}"><span class="mark" aria-hidden="true">{mark}</span>'
            f'<span class="visually-hidden">{said}</span><span>{summary}</span>{meta}</li>')
    return Markup('<ol class="steps">' + "\n".join(rows) + "</ol>")


@lru_cache(maxsize=128)
def _summaries(_revision_hash: str, steps: tuple[tuple[str, int, str, str], ...]
               ) -> dict[str, tuple[Markup, Markup]]:
    """{step id: (escaped id, "<n>. <kind label> <text…>")}, made once per revision."""
    env = current_app.jinja_env
    labels = env.get_template("_labels.html").module
    return {step_id: (escape(step_id), Markup(f"{number}. ") + labels.kind_label(kind)
                      + Markup(" ") + escape(do_truncate(env, text, 70)))
            for step_id, number, kind, text in steps}
