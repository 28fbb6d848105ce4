"""``panelwright db``: migrate the database (upgrade, downgrade, check, current)."""

from __future__ import annotations

import click
from sqlalchemy.exc import OperationalError

from server.config import Settings
from server.db import migrate
from server.db.session import make_engine

from . import fail


def _url() -> str:
    return Settings().database_url


@click.group("db")
def command() -> None:
    """Database migrations (PANELWRIGHT_DATABASE_URL, default sqlite:///./panelwright.db)."""


@command.command("upgrade")
@click.argument("revision", default="head")
def upgrade(revision: str) -> None:
    """Bring the database to REVISION (default: the newest)."""
    try:
        migrate.upgrade(_url(), revision)
    except OperationalError as exc:
        fail(f"cannot migrate {_url()}: {exc.orig}")
    click.echo(f"database at {migrate.current_revision(make_engine(Settings()))}")


@command.command("downgrade")
@click.argument("revision", default="-1")
def downgrade(revision: str) -> None:
    """Step the database back to REVISION (default: one step; "base" removes every table)."""
    try:
        migrate.downgrade(_url(), revision)
    except OperationalError as exc:
        fail(f"cannot migrate {_url()}: {exc.orig}")
    click.echo(f"database at {migrate.current_revision(make_engine(Settings())) or 'base (empty)'}")


@command.command("check")
def check() -> None:
    """Exit 0 when the database is at the newest migration, else 2 with the command that fixes it."""
    try:
        migrate.ensure_migrated(make_engine(Settings()))
    except migrate.DatabaseNotMigrated as exc:
        fail(str(exc))
    except OperationalError as exc:
        fail(f"cannot open {_url()}: {exc.orig}")
    click.echo(f"database is current (migration {migrate.head_revision()})")
