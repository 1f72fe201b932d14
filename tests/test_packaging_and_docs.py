"""An installed wheel finds its shipped folders; the README documents the CLI."""

from __future__ import annotations

import os
import re
import subprocess
import sys
import zipfile
from pathlib import Path

from webapp.cli import cli

ROOT = Path(__file__).resolve().parents[1]


def test_wheel_carries_static_tasks_and_scenarios_and_finds_them(tmp_path):
    built = subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "-q",
         "-w", str(tmp_path / "dist"), str(ROOT)], capture_output=True, text=True, timeout=300)
    assert built.returncode == 0, built.stderr
    wheel = next((tmp_path / "dist").glob("sparkward-*.whl"))
    names = set(zipfile.ZipFile(wheel).namelist())
    assert "webapp/static/vendor/htmx-2.0.11.min.js" in names
    assert "webapp/static/css/sparkward.css" in names
    assert "webapp/demo_scenarios/bramblecoast.yaml" in names
    for task in (ROOT / "tasks").glob("*.yaml"):
        assert f"webapp/tasks/{task.name}" in names
    assert "webapp/templates/mechanic/_job.html" in names
    # Unpacked elsewhere (away from the source tree), the package finds its own copies.
    target = tmp_path / "site"
    zipfile.ZipFile(wheel).extractall(target)
    probe = ("from webapp.resources import shipped_dir; "
             "print(shipped_dir('static')); print(shipped_dir('tasks'))")
    env = {**os.environ, "PYTHONPATH": str(target)}
    found = subprocess.run([sys.executable, "-c", probe], cwd=tmp_path, env=env,
                           capture_output=True, text=True, timeout=60)
    assert found.returncode == 0, found.stderr
    assert all(line.startswith(str(target)) for line in found.stdout.split())


def _commands(group, prefix=""):
    for name, command in group.commands.items():
        if hasattr(command, "commands"):
            yield from _commands(command, f"{prefix}{name} ")
        else:
            yield f"{prefix}{name}"


def test_readme_documents_every_command_and_the_two_set_up_commands():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    for command in _commands(cli):
        assert f"sparkward {command}" in readme, command
    assert "./run.sh demo" in readme and "./run.sh test" in readme
    assert (ROOT / ".ci" / "run").read_text().strip().endswith("./run.sh test")


def test_readme_opens_with_the_job_paragraph_and_lists_every_dependency():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    first = readme.split("\n\n")[1]
    assert "mechanics" in first and len(first) > 400
    pyproject = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    declared = re.findall(r'^\s+"([a-zA-Z0-9_-]+)[><=]', pyproject, flags=re.M)
    assert declared
    for package in declared:
        assert f"| {package}" in readme or f", {package}" in readme, package
