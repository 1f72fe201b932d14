"""Where the station's shipped files are: static/, tasks/ and demo_scenarios/.

In a source checkout they sit beside the package; an installed wheel carries
them inside it (see pyproject.toml). Either way these functions find them.
"""

from __future__ import annotations

from pathlib import Path

_PACKAGE = Path(__file__).resolve().parent


def shipped_dir(name: str) -> Path:
    """The folder `name` ("static", "tasks" or "demo_scenarios") as shipped."""
    for candidate in (_PACKAGE / name, _PACKAGE.parent / name):
        if candidate.is_dir():
            return candidate
    raise FileNotFoundError(f"the shipped folder '{name}' is missing from this installation")
