"""``panelwright backup`` and ``panelwright restore``: copies of the SQLite store (see server/backup.py)."""

from __future__ import annotations

from pathlib import Path

import click

from server.backup import BackupError, UseDatabaseTools, backup_sqlite, daily_backup, restore_sqlite
from server.config import Settings

from . import fail

#: Exit status when the database is PostgreSQL (use pg_dump / pg_restore): not a user typo, a different tool.
EXIT_USE_DB_TOOLS = 3


def _run(action):  # noqa: ANN001, ANN202 - small local helper
    try:
        return action()
    except UseDatabaseTools as exc:
        fail(str(exc), code=EXIT_USE_DB_TOOLS)
    except BackupError as exc:
        fail(str(exc))


@click.command("backup")
@click.option("--out", type=click.Path(dir_okay=False, path_type=Path), help="File to write the copy to")
@click.option("--force", is_flag=True, help="Overwrite --out if it exists")
@click.option("--daily", is_flag=True, help="Write today's file in the backup folder and prune old ones (for cron)")
@click.option("--dir", "folder", type=click.Path(file_okay=False, path_type=Path), help="Backup folder for --daily")
@click.option("--keep", type=click.IntRange(1), default=None, help="Daily backups to keep (default 14)")
def backup(out: Path | None, force: bool, daily: bool, folder: Path | None, keep: int | None) -> None:
    """Copy the live SQLite database (safe while the server runs)."""
    settings = Settings()
    if daily:
        folder = folder or (Path(settings.backup_dir) if settings.backup_dir else None)
        if folder is None:
            fail("--daily needs a folder: --dir DIR or PANELWRIGHT_BACKUP_DIR")
        made = _run(lambda: daily_backup(settings.database_url, folder, keep or settings.backup_keep))
        click.echo(f"wrote {made}" if made else f"today's backup is already in {folder}")
        return
    if out is None:
        fail("say where to write the copy: --out FILE (or --daily with a folder)")
    made = _run(lambda: backup_sqlite(settings.database_url, out, overwrite=force))
    click.echo(f"wrote {made}")


@click.command("restore")
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--force", is_flag=True, help="Restore even if the database changed after the backup was made")
def restore(file: Path, force: bool) -> None:
    """Replace the database with the backup FILE (stop the server first)."""
    settings = Settings()
    outcome = _run(lambda: restore_sqlite(settings.database_url, file, force=force))
    click.echo(f"restored {outcome.restored_from}")
    if outcome.kept_previous:
        click.echo(f"the replaced database is kept as {outcome.kept_previous}")


commands = [backup, restore]
command = backup
