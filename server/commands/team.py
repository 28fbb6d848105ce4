"""What ``panelwright serve`` adds for team use: the single-user address check and daily backups."""

from __future__ import annotations

import click

from server.auth.middleware import is_loopback
from server.config import Settings

from . import fail


def team_checks(settings: Settings) -> None:
    """Refuse single-user mode on an address other machines can reach."""
    if settings.single_user and not (is_loopback(settings.host) or settings.host == "localhost"):
        fail(
            f"--single-user serves this machine only, but --host is {settings.host}; "
            "use 127.0.0.1, or create accounts (panelwright user add NAME --role admin) to serve the LAN"
        )
    if settings.single_user:
        click.echo("single-user mode: no sign-in; every request acts as the local admin", err=True)


def start_team_tasks(settings: Settings) -> None:
    """Start the daily backup thread when PANELWRIGHT_BACKUP_DIR is set (SQLite only)."""
    if not settings.backup_dir:
        return
    if not settings.database_url.startswith("sqlite"):
        click.echo("PANELWRIGHT_BACKUP_DIR is ignored for PostgreSQL: schedule pg_dump instead (docs/lan.md)", err=True)
        return
    from server.backup import start_daily_backups

    start_daily_backups(settings.database_url, settings.backup_dir, settings.backup_keep)
    click.echo(f"daily backups to {settings.backup_dir} (keeping {settings.backup_keep})", err=True)
