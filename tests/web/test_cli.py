"""The station's commands: init, tasks check, people add (also through `flask --app webapp`)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

from click.testing import CliRunner

from webapp import store
from webapp.cli import cli
from webapp.store import people

ROOT = Path(__file__).resolve().parents[2]


def test_init_creates_the_database_and_loads_the_library(tmp_path):
    path = tmp_path / "new.db"
    result = CliRunner().invoke(cli, ["init", "--db", str(path)])
    assert result.exit_code == 0, result.output
    db = store.connect(path)
    ids = {r["procedure_id"] for r in db["procedure_revisions"].rows_where("status = 'approved'")}
    assert ids == {p.stem for p in (ROOT / "tasks").glob("*.yaml")}
    assert db.conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    # Running init again stores nothing twice.
    again = CliRunner().invoke(cli, ["init", "--db", str(path)])
    assert again.exit_code == 0 and "none new" in again.output
    assert db["procedure_revisions"].count == len(ids)


def test_tasks_check_passes_on_the_shipped_library():
    result = CliRunner().invoke(cli, ["tasks", "check"])
    assert result.exit_code == 0, result.output
    assert "5 procedure file(s) valid" in result.output


def test_tasks_check_prints_every_problem_and_exits_non_zero(tmp_path):
    bad = tmp_path / "bad-one.yaml"
    text = (ROOT / "tasks" / "exciter-removal.yaml").read_text(encoding="utf-8")
    text = text.replace("id: exciter-removal", "id: bad-one").replace(
        "kind: lockout", "kind: lockdown").replace("minimum: 2 min", "minimum: 2 kg")
    bad.write_text(text, encoding="utf-8")
    result = CliRunner().invoke(cli, ["tasks", "check", str(bad)])
    assert result.exit_code != 0
    assert "step 4 (breakers), field 'kind': unknown step kind 'lockdown'" in result.output
    assert "field 'minimum'" in result.output and "time is needed" in result.output
    assert "2 problem(s) in 1 file(s)" in result.output


def test_tasks_check_names_a_file_whose_name_is_not_its_id(tmp_path):
    wrong = tmp_path / "renamed.yaml"
    wrong.write_text((ROOT / "tasks" / "exciter-removal.yaml").read_text(encoding="utf-8"),
                     encoding="utf-8")
    result = CliRunner().invoke(cli, ["tasks", "check", str(wrong)])
    assert result.exit_code != 0 and "exciter-removal.yaml" in result.output


def test_people_add_reads_the_password_then_the_pin_from_stdin(tmp_path):
    from cryptography import x509

    from webapp.station.authority import station_authority
    from webapp.store import signers

    path = tmp_path / "p.db"
    result = CliRunner().invoke(cli, [
        "people", "add", "--db", str(path), "--username", "kim", "--name", "Kim Demo",
        "--role", "mechanic", "--role", "supervisor", "--authorisation", "DEMO-77",
        "--password-stdin"], input="a-long-password\n246813\n")
    assert result.exit_code == 0, result.output
    assert "with a signing key" in result.output
    db = store.connect(path)
    person = people.person_by_username(db, "kim")
    assert person.roles == ("mechanic", "supervisor") and person.authorisation == "DEMO-77"
    enrolled = signers.signer(db, person.id)
    cert = x509.load_pem_x509_certificate(enrolled["cert_pem"].encode())
    authority = station_authority(path, "x", __import__("datetime").datetime.now(
        __import__("datetime").UTC))
    cert.verify_directly_issued_by(authority.cert)   # issued by this station's CA
    assert "246813" not in enrolled["sealed_key"]     # the PIN itself is never kept


def _people_add(path, stdin, *options, username="kim", role="mechanic"):
    """`sparkward people add` for one person, standard input given."""
    return CliRunner().invoke(cli, [
        "people", "add", "--db", str(path), "--username", username, "--name", "Kim Demo",
        "--role", role, "--password-stdin", *options], input=stdin)


def test_people_add_refuses_a_short_pin_and_stores_nobody(tmp_path):
    path = tmp_path / "p.db"
    result = _people_add(path, "a-long-password\n12345\n")
    assert result.exit_code != 0 and "6" in result.output
    assert store.connect(path)["people"].count == 0


def test_people_add_without_a_pin_line_is_refused_and_stores_nobody(tmp_path):
    path = tmp_path / "p.db"
    result = _people_add(path, "a-long-password\n")
    assert result.exit_code != 0 and "signing PIN is missing" in result.output
    assert not path.exists()   # refused before the station was even opened


def test_people_add_with_no_signing_key_enrols_a_person_who_cannot_sign(tmp_path):
    from webapp.store import signers

    path = tmp_path / "p.db"
    result = _people_add(path, "a-long-password\n", "--no-signing-key", username="ada",
                         role="admin")
    assert result.exit_code == 0, result.output
    assert "without a signing key" in result.output
    db = store.connect(path)
    assert signers.signer(db, people.person_by_username(db, "ada").id) is None


def test_people_add_refuses_a_short_password_and_stores_nobody(tmp_path):
    path = tmp_path / "p.db"
    result = _people_add(path, "short\n135791\n")
    assert result.exit_code != 0 and "at least 8" in result.output
    assert store.connect(path)["people"].count == 0


def test_the_same_commands_answer_under_flask(tmp_path):
    result = subprocess.run(
        [sys.executable, "-m", "flask", "--app", "webapp", "tasks", "check"],
        cwd=tmp_path, capture_output=True, text=True, timeout=60,
        env={"PATH": "/usr/bin:/bin", "SPARKWARD_DB": str(tmp_path / "f.db")})
    assert result.returncode == 0, result.stderr
    assert "5 procedure file(s) valid" in result.stdout
