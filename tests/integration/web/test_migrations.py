"""Alembic: the models match the migrations, and upgrade → downgrade → upgrade works on each backend."""

from __future__ import annotations

import pytest
from alembic import command
from sqlalchemy import inspect

from server.config import Settings
from server.db import migrate
from server.db.models import Base
from server.db.session import make_engine
from server.web.app import create_app


def test_alembic_check_finds_nothing_to_generate(db_url):
    command.check(migrate.alembic_config(db_url))  # raises if the models drifted from the migrations


def test_upgrade_downgrade_upgrade(db_url):
    engine = make_engine(Settings(database_url=db_url))
    tables = {t.name for t in Base.metadata.sorted_tables}
    assert tables <= set(inspect(engine).get_table_names())
    migrate.downgrade(db_url, "base")
    assert not tables & set(inspect(engine).get_table_names())
    assert migrate.current_revision(engine) is None
    migrate.upgrade(db_url)
    assert tables <= set(inspect(engine).get_table_names())
    assert migrate.current_revision(engine) == migrate.head_revision()
    engine.dispose()


def test_app_refuses_an_unmigrated_database(tmp_path):
    with pytest.raises(migrate.DatabaseNotMigrated, match="panelwright db upgrade"):
        create_app(Settings(database_url=f"sqlite:///{tmp_path / 'empty.db'}"))


def test_sqlite_connection_settings(tmp_path):
    url = f"sqlite:///{tmp_path / 'x.db'}"
    engine = make_engine(Settings(database_url=url, sqlite_busy_timeout_ms=1234))
    with engine.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() == 1234
    engine.dispose()
