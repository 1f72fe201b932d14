"""Station commands for the register of calibrated instruments: `sparkward instruments list |
add | calibrated | withdraw` (every change a new entry of the register's log)."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import click

from . import store
from .clock import system_clock

DB_OPTION = click.option("--db", "db_path", type=click.Path(dir_okay=False, path_type=Path),
                         help="SQLite file (default: $SPARKWARD_DB or ./instance/sparkward.db)")
ID_OPTION = click.option("--id", "instrument_id", required=True,
                         help="The instrument's ID, as marked on it")
_OPTION_OF = {"instrument_id": "--id", "range_low": "--range-low", "range_high": "--range-high",
              "range_unit": "--unit", "calibration_due": "--due", "kind": "--kind",
              "status": "--quarantine"}


def _run(db_path: Path | None, change: Callable[[store.Database], Any]) -> Any:
    """Open the station's database and make one change; a wrong value names its option."""
    from . import create_app
    from .domain.readings import InputProblem

    app = create_app({"DB_PATH": str(db_path.resolve())} if db_path else None)
    db = store.create(app.config["DB_PATH"])
    try:
        return change(db)
    except InputProblem as problem:
        option = _OPTION_OF.get(problem.field, "--" + problem.field.replace("_", "-"))
        raise click.ClickException(f"{option}: {problem.message}") from None
    finally:
        db.close()


@click.group(help="The station's register of calibrated instruments.")
def instruments() -> None:
    pass


@instruments.command("list", help="Every instrument as it is now: ID, kind, range, "
                                  "calibration due date and status.")
@DB_OPTION
def instruments_list(db_path: Path | None) -> None:
    from .store import instruments as register

    today = system_clock().date()
    for i in _run(db_path, register.all_instruments):
        status = (i.status if i.status != "in service"
                  else "OVERDUE for calibration" if not i.calibration_in(today)
                  else "in service")
        click.echo(f"{i.instrument_id}\t{i.kind}\t{i.range_text}\tdue "
                   f"{i.calibration_due.isoformat()}\t{status}")


@instruments.command("add", help="Register an instrument.")
@DB_OPTION
@ID_OPTION
@click.option("--kind", required=True, help="torque wrench, insulation tester, milliohm meter, "
                                            "ammeter, voltmeter, erosion gauge, spark counter")
@click.option("--range-low", required=True, help="The bottom of its range")
@click.option("--range-high", required=True, help="The top of its range")
@click.option("--unit", "range_unit", required=True, help="The range's unit (lbf*in, V, mm...)")
@click.option("--due", "calibration_due", required=True, metavar="YYYY-MM-DD",
              help="Calibration due: the last day it may be used")
def instruments_add(db_path: Path | None, instrument_id: str, kind: str, range_low: str,
                    range_high: str, range_unit: str, calibration_due: str) -> None:
    from .station import instruments as keeping

    added = _run(db_path, lambda db: keeping.add(
        db, instrument_id=instrument_id, kind=kind, range_low=range_low, range_high=range_high,
        range_unit=range_unit, calibration_due=calibration_due, by=None, now=system_clock()))
    click.echo(f"Registered {added.kind} {added.instrument_id}, range {added.range_text}, "
               f"calibration due {added.calibration_due.isoformat()}")


@instruments.command("calibrated", help="Record a calibration: the new due date (a quarantined "
                                        "instrument is back in service).")
@DB_OPTION
@ID_OPTION
@click.option("--due", "calibration_due", required=True, metavar="YYYY-MM-DD",
              help="The new calibration due date")
def instruments_calibrated(db_path: Path | None, instrument_id: str,
                           calibration_due: str) -> None:
    from .station import instruments as keeping

    after = _run(db_path, lambda db: keeping.calibrated(
        db, instrument_id=instrument_id, calibration_due=calibration_due, by=None,
        now=system_clock()))
    click.echo(f"{after.instrument_id} calibrated, due {after.calibration_due.isoformat()}, "
               "in service")


@instruments.command("withdraw", help="Take an instrument out: withdrawn for good, or "
                                      "quarantined until it is calibrated again.")
@DB_OPTION
@ID_OPTION
@click.option("--quarantine", "status", flag_value="quarantined", default="withdrawn",
              help="Quarantine it instead of withdrawing it")
def instruments_withdraw(db_path: Path | None, instrument_id: str, status: str) -> None:
    from .station import instruments as keeping

    after = _run(db_path, lambda db: keeping.take_out(
        db, instrument_id=instrument_id, status=status, by=None, now=system_clock()))
    click.echo(f"{after.instrument_id} {after.status}: no reading is taken with it")
