"""`sparkward people authorise`: grant an enrolled person what they may sign."""

from __future__ import annotations

from click.testing import CliRunner

from webapp import store
from webapp.cli import cli
from webapp.store import authorisations, people


def _enrolled(tmp_path):
    path = tmp_path / "p.db"
    added = CliRunner().invoke(cli, [
        "people", "add", "--db", str(path), "--username", "kim", "--name", "Kim Demo",
        "--role", "mechanic", "--password-stdin"], input="a-long-password\n246813\n")
    assert added.exit_code == 0, added.output
    return path


def _authorise(path, *changes, username="kim"):
    options = {"--signatures": "perform,inspect", "--scope": "74,functional check",
               "--licence-kind": "Company authorisation (demo)",
               "--licence-number": "DEMO-CA-77", "--expires": "2099-12-31"}   # invented
    options.update(dict(zip(changes[::2], changes[1::2], strict=True)))
    arguments = ["people", "authorise", "--db", str(path), "--username", username]
    for option, value in options.items():
        arguments += [option, value]
    return CliRunner().invoke(cli, arguments)


def test_people_authorise_grants_and_says_what(tmp_path):
    path = _enrolled(tmp_path)
    result = _authorise(path)
    assert result.exit_code == 0, result.output
    assert ("Authorised Kim Demo (kim) to perform, inspect within 74, functional check, under "
            "Company authorisation (demo) no. DEMO-CA-77, valid through 2099-12-31"
            in result.output)
    db = store.connect(path)
    [held] = authorisations.held_by(db, people.person_by_username(db, "kim").id)
    assert held.signatures == ("perform", "inspect")
    assert held.scope == ("74", "functional check")
    assert held.granted_by is None                # granted at the station's command line


def test_people_authorise_names_the_bad_option_and_stores_nothing(tmp_path):
    path = _enrolled(tmp_path)
    for changes, words in ((("--scope", "engine"), "--scope: 'engine' is neither"),
                           (("--signatures", "sign"), "--signatures: 'sign' is not a kind"),
                           (("--expires", "2020-01-01"), "--expires: 2020-01-01 is already"),
                           (("--expires", "soon"), "--expires: Give the last day"),
                           (("--licence-number", " "), "--licence-number: Give the licence")):
        result = _authorise(path, *changes)
        assert result.exit_code != 0, changes
        assert words in result.output, result.output
    assert store.connect(path)["authorisations"].count == 0


def test_people_authorise_refuses_an_unknown_person(tmp_path):
    path = _enrolled(tmp_path)
    result = _authorise(path, username="nobody")
    assert result.exit_code != 0 and "no person 'nobody'" in result.output
    assert store.connect(path)["authorisations"].count == 0
