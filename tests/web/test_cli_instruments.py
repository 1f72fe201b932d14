"""`sparkward instruments list | add | calibrated | withdraw` over a real SQLite file.

IDs, ranges and dates are invented. A due date is the last day an instrument may be used:
common practice, no source."""

from __future__ import annotations

from click.testing import CliRunner

from webapp import store
from webapp.cli import cli
from webapp.store import instruments as register


def _invoke(path, *arguments):
    command, rest = arguments[0], arguments[1:]
    return CliRunner().invoke(cli, ["instruments", command, "--db", str(path), *rest])


def _add(path, *changes):
    options = {"--id": "TW-50", "--kind": "torque wrench", "--range-low": "20",
               "--range-high": "100", "--unit": "lbf*in", "--due": "2099-06-30"}
    options.update(dict(zip(changes[::2], changes[1::2], strict=True)))
    return _invoke(path, "add", *[x for pair in options.items() for x in pair])


def test_add_list_calibrate_and_withdraw_each_leave_an_entry(tmp_path):
    path = tmp_path / "i.db"
    added = _add(path)
    assert added.exit_code == 0, added.output
    assert "Registered torque wrench TW-50, range 20–100 lbf*in, calibration due 2099-06-30" \
        in added.output
    assert _add(path, "--id", "TW-51", "--due", "2020-01-31").exit_code == 0   # long overdue
    listed = _invoke(path, "list")
    assert listed.exit_code == 0, listed.output
    assert "TW-50\ttorque wrench\t20–100 lbf*in\tdue 2099-06-30\tin service" in listed.output
    assert "TW-51\ttorque wrench\t20–100 lbf*in\tdue 2020-01-31\tOVERDUE for calibration" \
        in listed.output
    quarantined = _invoke(path, "withdraw", "--id", "TW-51", "--quarantine")
    assert quarantined.exit_code == 0 and "TW-51 quarantined" in quarantined.output
    calibrated = _invoke(path, "calibrated", "--id", "TW-51", "--due", "2099-01-31")
    assert calibrated.exit_code == 0, calibrated.output
    assert "TW-51 calibrated, due 2099-01-31, in service" in calibrated.output
    withdrawn = _invoke(path, "withdraw", "--id", "TW-50")
    assert withdrawn.exit_code == 0 and "TW-50 withdrawn" in withdrawn.output
    db = store.connect(path)
    assert [e["change"] for e in register.history(db, "TW-51")] == [
        "added", "quarantined", "calibrated, due 2099-01-31"]
    assert register.instrument(db, "TW-50").status == "withdrawn"


def test_a_bad_value_names_its_option_and_nothing_is_kept(tmp_path):
    path = tmp_path / "i.db"
    for changes, words in ((("--kind", "hammer"), "--kind: Choose the kind"),
                           (("--unit", "V"), "--unit: 'V' is a unit of voltage"),
                           (("--range-high", "10"), "--range-high: The range's top"),
                           (("--due", "soon"), "--due: Give the calibration due date"),
                           (("--id", "TW 50"), "--id: 'TW 50' is not an instrument ID")):
        result = _add(path, *changes)
        assert result.exit_code != 0, changes
        assert words in result.output, result.output
    assert store.connect(path)["instrument_entries"].count == 0


def test_calibrating_an_unknown_or_withdrawn_instrument_is_refused(tmp_path):
    path = tmp_path / "i.db"
    unknown = _invoke(path, "calibrated", "--id", "TW-99", "--due", "2099-01-31")
    assert unknown.exit_code != 0 and "--id: TW-99 is not in the register" in unknown.output
    _add(path)
    _invoke(path, "withdraw", "--id", "TW-50")
    again = _invoke(path, "calibrated", "--id", "TW-50", "--due", "2099-01-31")
    assert again.exit_code != 0 and "is withdrawn" in again.output
    past = _add(path, "--id", "TW-52")
    assert past.exit_code == 0
    stale = _invoke(path, "calibrated", "--id", "TW-52", "--due", "2001-01-01")
    assert stale.exit_code != 0 and "--due: 2001-01-01 is already past" in stale.output
