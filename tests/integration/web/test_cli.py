"""The import, export and demo commands on the same database and service code as the app."""

from __future__ import annotations

import json

import click
import pytest
from click.testing import CliRunner

from server.commands import db, demo, export, importfile
from tests.helpers import DEMO_FILE

CLI = click.Group(commands={m.command.name: m.command for m in (db, demo, importfile, export)})


@pytest.fixture
def run(db_url, monkeypatch):
    monkeypatch.setenv("PANELWRIGHT_DATABASE_URL", db_url)
    runner = CliRunner()

    def invoke(*args: str):
        return runner.invoke(CLI, list(args))

    return invoke


def test_demo_is_idempotent(run, app):
    assert run("demo").exit_code == 0
    result = run("demo")
    assert result.exit_code == 0 and "replaced" in result.output
    projects = app.state.services.list_projects(include_archived=True)
    assert [p.number for p in projects] == ["26-041"]


def test_import_export_round_trip(run, tmp_path):
    result = run("import", str(DEMO_FILE))
    assert result.exit_code == 0, result.output
    out = tmp_path / "out.json"
    assert run("export", "26-041", "--out", str(out)).exit_code == 0
    assert json.loads(out.read_text()) == json.loads(DEMO_FILE.read_text())
    again = run("import", str(DEMO_FILE))
    assert again.exit_code == 2 and "already exists" in again.output
    assert run("import", str(DEMO_FILE), "--replace").exit_code == 0


def test_user_errors_exit_2_with_a_message(run, tmp_path):
    bad = tmp_path / "bad.json"
    data = json.loads(DEMO_FILE.read_text())
    data["panels"][0]["circuits"][0]["poles"] = 7
    bad.write_text(json.dumps(data))
    result = run("import", str(bad))
    assert result.exit_code == 2 and "poles" in result.output and str(bad) in result.output
    result = run("export", "no-such-project", "--out", str(tmp_path / "x.json"))
    assert result.exit_code == 2 and "no-such-project" in result.output


def test_db_check(run):
    result = run("db", "check")
    assert result.exit_code == 0 and "current" in result.output


def test_serve_refuses_an_unmigrated_database(tmp_path, monkeypatch):
    from server.commands import serve

    monkeypatch.setenv("PANELWRIGHT_DATABASE_URL", f"sqlite:///{tmp_path / 'fresh.db'}")
    result = CliRunner().invoke(serve.command, [])
    assert result.exit_code == 2
    assert "panelwright db upgrade" in result.output
