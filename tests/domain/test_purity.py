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


def _webapp_imports(path: Path) -> set[str]:
    """The webapp rooms a module imports (domain, store, records, station, web, ...)."""
    rooms = set()
    package = path.relative_to(WEBAPP).parts[:-1]
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.level:
            base = list(package)[:len(package) - (node.level - 1)]
            target = base + (node.module.split(".") if node.module else [])
            if target:
                rooms.add(target[0])
            else:  # `from .. import store, recording`
                rooms.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and (node.module or "").startswith("webapp."):
            rooms.add(node.module.split(".")[1])
    return rooms


# One direction: web -> station (services) -> domain <- store; records print from the store
# and the domain. A room may import itself and the rooms listed for it, nothing else.
ALLOWED = {
    "domain": {"domain"},
    "store": {"store", "domain"},
    "records": {"records", "store", "domain", "charts", "shown", "resources"},
    "station": {"station", "store", "domain", "records", "resources"},
}


def test_rooms_import_only_downwards():
    offenders = []
    for room, allowed in ALLOWED.items():
        for path in (WEBAPP / room).glob("*.py"):
            wrong = _webapp_imports(path) - allowed
            if wrong:
                offenders.append(f"{path.relative_to(WEBAPP)} imports {sorted(wrong)}")
    assert offenders == []


def test_no_service_module_is_left_at_the_top_of_webapp():
    top = sorted(p.name for p in WEBAPP.glob("*.py"))
    # cli_instruments.py holds the `sparkward instruments` commands (cli.py would pass 400 lines).
    assert top == ["__init__.py", "charts.py", "cli.py", "cli_instruments.py", "clock.py",
                   "resources.py", "shown.py"]
