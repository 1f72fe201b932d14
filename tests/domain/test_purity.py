"""The house rule: webapp/domain is pure, and only webapp/store imports sqlite_utils."""

from __future__ import annotations

import ast
from pathlib import Path

WEBAPP = Path(__file__).resolve().parents[2] / "webapp"


def _imports(path: Path) -> set[str]:
    names = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module.split(".")[0])
        elif isinstance(node, ast.ImportFrom) and node.level > 1:
            names.add(f"..{node.module or ''}")
    return names


def test_domain_imports_neither_flask_nor_sqlite_utils_nor_the_rest_of_the_app():
    files = list((WEBAPP / "domain").glob("*.py"))
    assert len(files) >= 5
    for path in files:
        found = _imports(path)
        assert not found & {"flask", "sqlite_utils", "sqlite3", "werkzeug", "webapp"}, path
        assert not [n for n in found if n.startswith("..")], path


def test_only_the_store_imports_sqlite_utils():
    offenders = [p for p in WEBAPP.rglob("*.py")
                 if "sqlite_utils" in _imports(p) and "store" not in p.relative_to(WEBAPP).parts]
    assert offenders == []
