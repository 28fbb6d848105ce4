"""Programmatic Alembic: upgrade, downgrade, and the "is this database migrated?" check.

``alembic.ini`` sits at the repository root and ``migrations/env.py`` reads the URL from
:class:`server.config.Settings`; here the same scripts run in-process, so the CLI, the
app's start-up check and the test fixtures use one code path.
"""

from __future__ import annotations

from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Engine

ROOT = Path(__file__).resolve().parents[2]
MIGRATIONS_DIR = ROOT / "migrations"
UPGRADE_HINT = "panelwright db upgrade"


class DatabaseNotMigrated(RuntimeError):
    """The database is missing tables or behind the code's newest migration."""


def alembic_config(database_url: str) -> Config:
    cfg = Config(str(ROOT / "alembic.ini")) if (ROOT / "alembic.ini").exists() else Config()
    cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
    # env.py prefers this over the settings when set, so tests can point at a temp database.
    cfg.attributes["database_url"] = database_url
    return cfg


def upgrade(database_url: str, revision: str = "head") -> None:
    command.upgrade(alembic_config(database_url), revision)


def downgrade(database_url: str, revision: str = "-1") -> None:
    command.downgrade(alembic_config(database_url), revision)


def head_revision() -> str | None:
    script = ScriptDirectory.from_config(alembic_config(""))
    return script.get_current_head()


def current_revision(engine: Engine) -> str | None:
    with engine.connect() as conn:
        return MigrationContext.configure(conn).get_current_revision()


def ensure_migrated(engine: Engine) -> None:
    """Raise :class:`DatabaseNotMigrated` (with the command that fixes it) unless at head."""
    current, head = current_revision(engine), head_revision()
    if current != head:
        where = engine.url.render_as_string(hide_password=True)
        state = "has no tables yet" if current is None else f"is at migration {current}, the code needs {head}"
        raise DatabaseNotMigrated(f"the database {where} {state}; run `{UPGRADE_HINT}` first")
