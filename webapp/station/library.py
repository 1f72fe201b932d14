"""The shop's procedure library: reading tasks/ files and loading them as approved revisions."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

from .. import store
from ..domain.procedure_files import (
    ProcedureInvalid,
    ProcedureProblem,
    content_hash,
    normalise_text,
    parse_procedure,
)
from ..domain.procedures import Procedure
from ..resources import shipped_dir
from ..store import procedures as stored


@dataclass(frozen=True)
class LibraryFile:
    path: Path
    text: str
    procedure: Procedure | None
    problems: tuple[ProcedureProblem, ...]


def procedure_files(paths: list[Path] | None = None) -> list[Path]:
    """The YAML files named (folders expanded), or the shipped library."""
    found: list[Path] = []
    for path in paths or [shipped_dir("tasks")]:
        if path.is_dir():
            found.extend(sorted(p for p in path.iterdir() if p.suffix in (".yaml", ".yml")))
        else:
            found.append(path)
    return found


def check_files(paths: list[Path] | None = None) -> list[LibraryFile]:
    """Read and validate procedure files; a file that cannot be read is a problem too."""
    results = []
    for path in procedure_files(paths):
        try:
            text = normalise_text(path.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError) as err:
            problem = ProcedureProblem(str(path), f"cannot be read: {err}")
            results.append(LibraryFile(path, "", None, (problem,)))
            continue
        try:
            procedure = parse_procedure(text, str(path))
        except ProcedureInvalid as invalid:
            results.append(LibraryFile(path, text, None, tuple(invalid.problems)))
            continue
        problems: tuple[ProcedureProblem, ...] = ()
        if procedure.id != path.stem:
            problems = (ProcedureProblem(str(path), f"the file name must be the procedure id "
                                         f"('{procedure.id}.yaml')", field="id"),)
        results.append(LibraryFile(path, text, procedure, problems))
    return results


def load_shop_library(db: store.Database, now: datetime,
                      paths: list[Path] | None = None) -> list[str]:
    """Store every valid library file as the approved revision of its procedure.

    Raises ProcedureInvalid (with every problem) if any file is invalid: a shop
    library is loaded whole or not at all. Returns the ids of new revisions.
    """
    files = check_files(paths)
    problems = [p for f in files for p in f.problems]
    if problems:
        raise ProcedureInvalid(problems)
    loaded = []
    with store.writing(db):
        for f in files:
            assert f.procedure is not None
            if stored.store_revision(db, procedure_id=f.procedure.id, title=f.procedure.title,
                                     content=f.text, content_hash=content_hash(f.text),
                                     status="approved", source_file=f.path.name, now=now):
                loaded.append(f.procedure.id)
    return loaded
