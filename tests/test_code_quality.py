"""The house habits hold: ruff's rules and mypy on the domain and the store."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", *args], cwd=ROOT, capture_output=True,
                          text=True, timeout=300)


def test_ruff_finds_nothing():
    result = _run("ruff", "check", ".")
    assert result.returncode == 0, result.stdout + result.stderr


def test_mypy_passes_on_domain_and_store():
    result = _run("mypy")
    assert result.returncode == 0, result.stdout + result.stderr
