"""The step screen's reading helpers, made available to the templates."""

from __future__ import annotations

from flask import Flask

from ..domain.procedures import EXCITER_MODES
from ..domain.readings import VERDICT_SYMBOL
from ..shown import (
    conversion_table,
    limits_text,
    si_factor,
    si_text,
    unit_choices,
    unit_label,
)


def register(app: Flask) -> None:
    app.jinja_env.globals.update(unit_choices=unit_choices, unit_label=unit_label,
                                 limits_text=limits_text, si_text=si_text, si_factor=si_factor,
                                 conversion_table=conversion_table, modes=EXCITER_MODES,
                                 verdict_symbol=lambda v: VERDICT_SYMBOL.get(v, ""))
