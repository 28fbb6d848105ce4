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


def test_0005_gives_existing_panels_feeder_rotation_0(db_url):
    """A panel row written before 0005 reads back as landed as labelled (0) after the upgrade."""
    from sqlalchemy import text

    engine = make_engine(Settings(database_url=db_url))
    migrate.downgrade(db_url, "0004")
    assert "feeder_rotation" not in {c["name"] for c in inspect(engine).get_columns("panels")}
    with engine.begin() as conn:
        conn.execute(
            text(
                "INSERT INTO projects (name, number, code, occupancy, include_future, vd_feeder_pct, vd_total_pct, "
                "imbalance_limit_pct, growth_margin_pct, firm, client, address, drawn_by, checked_by, paper, "
                "archived, data_version, created_at, updated_at) VALUES ('m (invented)', '', 'NEC-2023', 'office', "
                "false, 3, 5, 10, 25, '', '', '', '', '', 'tabloid-landscape', false, 1, "
                "CURRENT_TIMESTAMP, CURRENT_TIMESTAMP)"
            )
        )
        pid = conn.execute(text("SELECT id FROM projects")).scalar_one()
        conn.execute(
            text(
                "INSERT INTO panels (project_id, position, tag, system, bus_amps, spaces, description, location, "
                "mounting, feeder_length_ft, feeder_material, feeder_conduit, feeder_insulation_c, "
                "feeder_ambient_c, feeder_terminal_c) VALUES (:pid, 0, 'LP-1', '208Y/120 3PH 4W', 225, 42, '', '', "
                "'', 0, 'Cu', 'steel', 75, 30, 75)"
            ),
            {"pid": pid},
        )
    migrate.upgrade(db_url)
    with engine.connect() as conn:
        assert conn.execute(text("SELECT feeder_rotation FROM panels WHERE tag = 'LP-1'")).scalar_one() == 0
    engine.dispose()
