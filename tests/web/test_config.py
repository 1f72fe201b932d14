"""create_app's configuration: defaults, instance file, SPARKWARD_DB, then the mapping."""

from __future__ import annotations

from pathlib import Path

from webapp import create_app


def test_database_defaults_to_the_instance_folder(tmp_path, monkeypatch):
    monkeypatch.setenv("SPARKWARD_INSTANCE", str(tmp_path / "instance"))
    monkeypatch.delenv("SPARKWARD_DB", raising=False)
    app = create_app()
    assert Path(app.config["DB_PATH"]) == tmp_path / "instance" / "sparkward.db"
    assert Path(app.config["DB_PATH"]).is_file()  # migrations ran at start


def test_instance_file_then_environment_then_mapping(tmp_path, monkeypatch):
    instance = tmp_path / "instance"
    instance.mkdir()
    (instance / "sparkward.toml").write_text(
        'STATION_NAME = "Line station 3"\nDB_PATH = "' + str(tmp_path / "file.db") + '"\n')
    monkeypatch.setenv("SPARKWARD_INSTANCE", str(instance))
    monkeypatch.delenv("SPARKWARD_DB", raising=False)
    app = create_app()
    assert app.config["STATION_NAME"] == "Line station 3"
    assert app.config["DB_PATH"] == str(tmp_path / "file.db")

    monkeypatch.setenv("SPARKWARD_DB", str(tmp_path / "env.db"))
    assert create_app().config["DB_PATH"] == str(tmp_path / "env.db")

    mapped = create_app({"DB_PATH": str(tmp_path / "mapped.db")})
    assert mapped.config["DB_PATH"] == str(tmp_path / "mapped.db")
    assert mapped.config["STATION_NAME"] == "Line station 3"


def test_session_key_is_kept_beside_the_database(tmp_path, monkeypatch):
    monkeypatch.setenv("SPARKWARD_INSTANCE", str(tmp_path))
    first = create_app({"DB_PATH": str(tmp_path / "s.db")})
    second = create_app({"DB_PATH": str(tmp_path / "s.db")})
    assert first.config["SECRET_KEY"] == second.config["SECRET_KEY"]
    assert len(first.config["SECRET_KEY"]) == 64
    assert ((tmp_path / "s.db.secret").stat().st_mode & 0o777) == 0o600
