"""Station commands: init, demo, serve, tasks check, people add and authorise, instruments
(also under `flask`)."""

from __future__ import annotations

import sys
from pathlib import Path

import click
from flask import Flask

from . import serving, store
from .cli_instruments import instruments
from .clock import system_clock
from .domain.procedure_files import ProcedureInvalid
from .station.library import check_files, load_shop_library
from .store.people import ROLES

DB_OPTION = click.option("--db", "db_path", type=click.Path(dir_okay=False, path_type=Path),
                         help="SQLite file (default: $SPARKWARD_DB or ./instance/sparkward.db)")
HOST_OPTION = click.option("--host", default="127.0.0.1", show_default=True,
                           help="Address to listen on (0.0.0.0 for tablets on the LAN)")
PORT_OPTION = click.option("--port", default=8000, show_default=True, type=int)


def _check_names(_ctx: click.Context, _param: click.Parameter,
                 names: tuple[str, ...]) -> tuple[str, ...]:
    """Refuse a bad --name while the command line is read, before anything is changed."""
    from .records.server_identity import ServerNameProblem, parse_server_name

    for name in names:
        try:
            parse_server_name(name)
        except ServerNameProblem as problem:
            raise click.BadParameter(str(problem)) from None
    return names


HTTPS_OPTION = click.option(
    "--https", is_flag=True,
    help="Serve HTTPS with a certificate from the station's own certificate authority; "
         "tablets that trust it can install the app and open pages offline")
NAME_OPTION = click.option(
    "--name", "extra_names", multiple=True, metavar="NAME", callback=_check_names,
    help="With --https: another DNS name or IP address the tablets use to reach the "
         "station (repeat for more)")


def _need_https_for(https: bool, extra_names: tuple[str, ...]) -> None:
    if extra_names and not https:
        raise click.UsageError("--name sets a name in the HTTPS certificate: add --https.")


def _app(db_path: Path | None) -> Flask:
    from . import create_app

    return create_app({"DB_PATH": str(db_path.resolve())} if db_path else None)


def _init(app: Flask) -> list[str]:
    from .station.authority import station_authority

    station_authority(app.config["DB_PATH"], app.config["STATION_NAME"], system_clock())
    db = store.create(app.config["DB_PATH"])
    try:
        return load_shop_library(db, system_clock())
    finally:
        db.close()


@click.group(help="Sparkward: the ignition maintenance station.")
def cli() -> None:
    pass


@cli.command(help="Create or update the station database and load the shop's procedure library.")
@DB_OPTION
def init(db_path: Path | None) -> None:
    app = _app(db_path)
    try:
        loaded = _init(app)
    except ProcedureInvalid as invalid:
        raise click.ClickException("the procedure library has problems:\n"
                                   + str(invalid)) from None
    click.echo(f"Station database ready: {app.config['DB_PATH']}")
    click.echo(f"Approved revisions loaded: {', '.join(loaded) or 'none new'}")


@cli.command(help="Build a fresh database with the demo scenario and serve it.")
@DB_OPTION
@HOST_OPTION
@PORT_OPTION
@HTTPS_OPTION
@NAME_OPTION
@click.option("--scenario", default="bramblecoast", show_default=True)
def demo(db_path: Path | None, host: str, port: int, https: bool, extra_names: tuple[str, ...],
         scenario: str) -> None:
    from .station.scenario import (
        demo_logins,
        load_demo_jobs,
        load_scenario,
        read_scenario,
        scenario_path,
    )

    _need_https_for(https, extra_names)
    app = _app(db_path)
    path = Path(app.config["DB_PATH"])
    for stale in (path, path.with_name(path.name + "-wal"), path.with_name(path.name + "-shm")):
        stale.unlink(missing_ok=True)
    _init(app)
    from .station.authority import station_authority

    chosen = read_scenario(scenario_path(scenario))
    authority = station_authority(path, app.config["STATION_NAME"], system_clock())
    db = store.connect(path)
    try:
        load_scenario(db, chosen, system_clock(), authority)
        with app.app_context():  # a signed job's record is printed from the app's template
            opened = load_demo_jobs(db, chosen, system_clock(), authority)
    finally:
        db.close()
    click.echo(f"Demo scenario '{chosen.name}' built in {path}"
               + (f", with {len(opened)} demo job(s) (see the README)" if opened else ""))
    click.echo("Demo log-ins (username / password / signing PIN / role):")
    for username, password, pin, roles in demo_logins(chosen):
        click.echo(f"  {username:8} {password:14} {pin:8} {roles}")
    serving.serve(app, host, port, https, extra_names)


@cli.command(help="Serve the station with a production WSGI server (waitress; cheroot for "
                  "--https).")
@DB_OPTION
@HOST_OPTION
@PORT_OPTION
@HTTPS_OPTION
@NAME_OPTION
def serve(db_path: Path | None, host: str, port: int, https: bool,
          extra_names: tuple[str, ...]) -> None:
    _need_https_for(https, extra_names)
    serving.serve(_app(db_path), host, port, https, extra_names)


@cli.command(help="Check a work record PDF: its signatures, its event chain against the "
                  "station's database, and whether it is the record's latest state. Exit "
                  "code 0: intact and latest; 1: intact but superseded or incomplete; 2: "
                  "altered, untrusted or not a file the station issued.")
@click.argument("pdf_file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@DB_OPTION
def verify(pdf_file: Path, db_path: Path | None) -> None:
    from .records.verify import check_record, revocations
    from .station.authority import station_authority
    from .store import jobs, signers

    app = _app(db_path)
    authority = station_authority(app.config["DB_PATH"], app.config["STATION_NAME"],
                                  system_clock())
    db = store.connect(app.config["DB_PATH"])
    try:
        result = check_record(pdf_file.read_bytes(), authority.cert,
                              lambda job_id: jobs.events(db, job_id),
                              lambda job_id: signers.stored_states(db, job_id),
                              revocations(signers.revoked_signers(db)))
    finally:
        db.close()
    click.echo(f"Record {result.record_id or '(unknown)'}"
               + (f", job {result.job_id}" if result.job_id else "")
               + (f", revision {result.revision}" if result.revision else ""))
    if result.standing_message:
        click.echo(f"  standing: {result.standing_message}")
    for r in result.signatures:
        click.echo(f"  {r.field_name}: {r.signer} ({r.authorisation or 'no authorisation'}), "
                   f"{r.meaning}, "
                   + (f"{r.signed_at:%Y-%m-%d %H:%M:%S %Z}" if r.signed_at else "no time")
                   + f": {'intact' if r.intact else 'NOT INTACT'}, "
                   f"{'trusted' if r.trusted else 'NOT TRUSTED'}"
                   + (", CHANGED AFTERWARDS" if r.modified_after else "")
                   + (f", time-stamped {r.time_stamped_at:%Y-%m-%d %H:%M:%S %Z}"
                      if r.time_stamp_ok else ", TIME-STAMP DOES NOT VERIFY"
                      if r.time_stamp_ok is False else ", no time-stamp"))
    for name in result.unsigned:
        click.echo(f"  {name}: signature box still empty (not signed on this revision)")
    for note in result.notes:
        click.echo(f"  note: {note}")
    if result.chain_message:
        click.echo(f"  chain: {result.chain_message}")
    for problem in result.problems:
        click.echo(f"  problem: {problem}")
    if result.ok:
        click.echo("The record checks out: intact, trusted and the latest state.")
    elif result.intact:
        click.echo(f"The record is intact but not the latest: {result.standing_message}.")
    else:
        click.echo("The record does NOT check out.")
    sys.exit(result.exit_code)


@cli.group(help="The shop's procedure library.")
def tasks() -> None:
    pass


@tasks.command("check", help="Validate procedure files (default: the shipped library).")
@click.argument("paths", nargs=-1, type=click.Path(exists=True, path_type=Path))
def tasks_check(paths: tuple[Path, ...]) -> None:
    results = check_files(list(paths) or None)
    problems = [p for r in results for p in r.problems]
    for r in results:
        if not r.problems:
            click.echo(f"ok    {r.path}")
    for problem in problems:
        click.echo(f"ERROR {problem}", err=True)
    if problems:
        raise click.ClickException(f"{len(problems)} problem(s) in "
                                   f"{sum(1 for r in results if r.problems)} file(s)")
    click.echo(f"{len(results)} procedure file(s) valid")


@cli.group(help="People enrolled on the station.")
def people() -> None:
    pass


@people.command("add", help="Enrol a person. The password is the first line of standard input.")
@DB_OPTION
@click.option("--username", required=True)
@click.option("--name", "full_name", required=True, help="Full name as printed on records")
@click.option("--role", "roles", required=True, multiple=True, type=click.Choice(ROLES),
              help="Repeat for more than one role")
@click.option("--authorisation", default=None, help="Certificate or authorisation number")
@click.option("--password-stdin", is_flag=True, required=True,
              help="Read the password, then the signing PIN (6+ digits), one a line, from "
                   "standard input")
@click.option("--no-signing-key", is_flag=True,
              help="Enrol a person who never signs (no PIN line is read; no key is issued)")
def people_add(db_path: Path | None, username: str, full_name: str, roles: tuple[str, ...],
               authorisation: str | None, password_stdin: bool, no_signing_key: bool) -> None:
    from .station.accounts import enrol
    from .station.authority import station_authority

    password = sys.stdin.readline().rstrip("\r\n")
    pin = None if no_signing_key else sys.stdin.readline().rstrip("\r\n")
    if pin == "":
        raise click.ClickException(
            "the signing PIN is missing: give it (6 or more digits) on the line after the "
            "password, or pass --no-signing-key for a person who never signs")
    app = _app(db_path)
    db = store.create(app.config["DB_PATH"])
    try:
        authority = station_authority(app.config["DB_PATH"], app.config["STATION_NAME"],
                                      system_clock())
        person = enrol(db, username=username, full_name=full_name, roles=list(roles),
                       password=password, authorisation=authorisation, now=system_clock(),
                       pin=pin, authority=authority)
    except ValueError as err:
        raise click.ClickException(str(err)) from None
    finally:
        db.close()
    signing = "with a signing key" if pin else "without a signing key (--no-signing-key)"
    click.echo(f"Enrolled {person.full_name} ({person.username}) as "
               f"{', '.join(person.roles)}, {signing}")


@people.command("authorise", help="Grant an enrolled person an authorisation to sign: the "
                                  "kinds of signature, the scope, the licence it rests on and "
                                  "the last day it is valid.")
@DB_OPTION
@click.option("--username", required=True)
@click.option("--signatures", required=True, metavar="KINDS",
              help="Comma-separated: perform, inspect, certify")
@click.option("--scope", required=True, metavar="SCOPE",
              help="Comma-separated ATA chapters (74), sections (74-10) or kinds of procedure "
                   "(removal, installation, inspection, functional check)")
@click.option("--licence-kind", required=True, help="Kind of licence or authorisation, "
                                                    "printed with each signature")
@click.option("--licence-number", required=True, help="Licence or authorisation number")
@click.option("--expires", "expires_on", required=True, metavar="YYYY-MM-DD",
              help="The last day it is valid")
def people_authorise(db_path: Path | None, username: str, signatures: str, scope: str,
                     licence_kind: str, licence_number: str, expires_on: str) -> None:
    from .domain.readings import InputProblem
    from .station.authorising import authorise
    from .store import people as people_store

    app = _app(db_path)
    db = store.create(app.config["DB_PATH"])
    try:
        person = people_store.person_by_username(db, username)
        if person is None:
            raise click.ClickException(f"no person '{username}' is enrolled on this station")
        granted = authorise(db, person_id=person.id, signatures=signatures, scope=scope,
                            licence_kind=licence_kind, licence_number=licence_number,
                            expires_on=expires_on, granted_by=None, now=system_clock())
    except InputProblem as problem:
        option = "--expires" if problem.field == "expires_on" else (
            "--" + problem.field.replace("_", "-"))
        raise click.ClickException(f"{option}: {problem.message}") from None
    finally:
        db.close()
    click.echo(f"Authorised {person.full_name} ({person.username}) to "
               f"{', '.join(granted.signatures)} within {granted.scope_text}, under "
               f"{granted.licence_kind} no. {granted.licence_number}, valid through "
               f"{granted.expires_on.isoformat()}")


cli.add_command(instruments)


def register(app: Flask) -> None:
    """Make the same commands reachable as `flask --app webapp ...`."""
    for command in cli.commands.values():
        app.cli.add_command(command)


def main() -> None:
    cli()
