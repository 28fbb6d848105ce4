"""``panelwright user``, ``backup`` and ``restore`` on a migrated database (exit status 2 and a message for user errors)."""

from __future__ import annotations

import sqlite3
from datetime import date
from pathlib import Path

import pytest
from click.testing import CliRunner

from server.auth.accounts import authenticate
from server.backup import daily_backup
from server.cli import cli
from tests.integration.web.conftest import TEST_PASSWORD


def _run(monkeypatch, db_url: str, args: list[str], stdin: str | None = None):
    monkeypatch.setenv("PANELWRIGHT_DATABASE_URL", db_url)
    return CliRunner().invoke(cli, args, input=stdin)


def test_user_commands(monkeypatch, app, db_url):
    r = _run(monkeypatch, db_url, ["user", "add", "kim", "--role", "admin", "--password-stdin"], TEST_PASSWORD + "\n")
    assert r.exit_code == 0, r.output
    assert TEST_PASSWORD not in r.output
    r = _run(monkeypatch, db_url, ["user", "add", "lee", "--role", "reviewer"], f"{TEST_PASSWORD}\n{TEST_PASSWORD}\n")
    assert r.exit_code == 0, r.output
    listing = _run(monkeypatch, db_url, ["user", "list"]).output
    assert "kim\tadmin" in listing and "lee\treviewer" in listing
    assert authenticate(app.state.services.sessions, name="lee", password=TEST_PASSWORD)
    r = _run(monkeypatch, db_url, ["user", "passwd", "lee", "--password-stdin"], "short\n")
    assert r.exit_code == 2 and "at least 8 characters" in r.output
    r = _run(monkeypatch, db_url, ["user", "passwd", "lee", "--password-stdin"], "a-new-long-secret\n")
    assert r.exit_code == 0 and authenticate(app.state.services.sessions, name="lee", password="a-new-long-secret")
    r = _run(monkeypatch, db_url, ["user", "remove", "kim"])
    assert r.exit_code == 2 and "last admin" in r.output
    r = _run(
        monkeypatch, db_url, ["user", "add", "kim", "--role", "engineer", "--password-stdin"], TEST_PASSWORD + "\n"
    )
    assert r.exit_code == 2 and "already exists" in r.output
    assert _run(monkeypatch, db_url, ["user", "remove", "lee"]).exit_code == 0
    assert "lee" not in _run(monkeypatch, db_url, ["user", "list"]).output


def test_backup_and_restore(monkeypatch, app, db_url, demo_id, tmp_path: Path):
    if not db_url.startswith("sqlite"):
        r = _run(monkeypatch, db_url, ["backup", "--out", str(tmp_path / "x.db")])
        assert r.exit_code == 3 and "pg_dump" in r.output
        return
    out = tmp_path / "copy.db"
    r = _run(monkeypatch, db_url, ["backup", "--out", str(out)])
    assert r.exit_code == 0, r.output
    conn = sqlite3.connect(out)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert conn.execute("SELECT count(*) FROM circuits").fetchone()[0] > 0
    conn.close()
    assert _run(monkeypatch, db_url, ["backup", "--out", str(out)]).exit_code == 2  # no silent overwrite
    # A change after the backup: restore refuses without --force, and says why.
    app.state.services.set_archived(demo_id, True)
    r = _run(monkeypatch, db_url, ["restore", str(out)])
    assert r.exit_code == 2 and "changed after this backup" in r.output and "--force" in r.output
    r = _run(monkeypatch, db_url, ["restore", str(out), "--force"])
    assert r.exit_code == 0, r.output
    assert "kept as" in r.output
    app.state.services.cache.drop(demo_id)
    assert app.state.services.snapshot(demo_id).archived is False
    r = _run(monkeypatch, db_url, ["restore", str(tmp_path / "missing.db")])
    assert r.exit_code == 2 and "no backup file" in r.output


def test_daily_backup_keeps_the_newest(app, db_url, tmp_path: Path):
    if not db_url.startswith("sqlite"):
        pytest.skip("daily backups are for SQLite; PostgreSQL uses pg_dump")
    folder = tmp_path / "daily"
    for day in range(1, 6):
        assert daily_backup(db_url, folder, keep=3, today=date(2026, 11, day)) is not None
    assert daily_backup(db_url, folder, keep=3, today=date(2026, 11, 5)) is None  # once a day
    assert sorted(p.name for p in folder.iterdir()) == [f"panelwright-2026-11-0{d}.db" for d in (3, 4, 5)]
