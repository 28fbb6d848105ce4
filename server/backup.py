"""Backups and restores of the SQLite store; guidance for PostgreSQL.

* :func:`backup_sqlite` copies a live database with SQLite's online backup API
  (``sqlite3.Connection.backup``): consistent even while the server writes, WAL included; the
  copy is checked with ``PRAGMA integrity_check`` before it gets its final name.
* :func:`daily_backup` keeps one file per day (``panelwright-YYYY-MM-DD.db``) in a folder and
  deletes the oldest beyond ``keep``; ``panelwright serve`` runs it in a background thread when
  ``PANELWRIGHT_BACKUP_DIR`` is set, and ``panelwright backup --daily`` runs it once (for cron
  or a systemd timer).
* :func:`restore_sqlite` refuses to replace a database that changed after the backup was made
  (newest audit row or project update) unless forced, keeps the replaced file beside it, then
  copies the backup in with the same API and migrates it to the newest schema.

PostgreSQL has its own tools (``pg_dump`` / ``pg_restore``); :class:`UseDatabaseTools` says how.
"""

from __future__ import annotations

import logging
import os
import re
import sqlite3
import threading
from dataclasses import dataclass
from datetime import UTC, date, datetime
from pathlib import Path

from sqlalchemy.engine import URL, make_url

log = logging.getLogger("panelwright.backup")
DAILY_RE = re.compile(r"^panelwright-(\d{4}-\d{2}-\d{2})\.db$")


class BackupError(Exception):
    """A backup or restore that cannot be done; the message says why and what to do."""


class UseDatabaseTools(BackupError):
    """The database is PostgreSQL: its own dump and restore tools are the right ones."""


PG_GUIDANCE = (
    "the database is PostgreSQL: back it up with its own tools, e.g.\n"
    "  pg_dump --format=custom --file=panelwright-$(date +%F).dump '{url}'\n"
    "and restore with\n"
    "  pg_restore --clean --if-exists --dbname='{url}' panelwright-YYYY-MM-DD.dump\n"
    "(schedule pg_dump with cron or a systemd timer; see docs/lan.md)"
)


def sqlite_path(database_url: str) -> Path:
    """The file of a ``sqlite:///`` URL; :class:`UseDatabaseTools` for PostgreSQL."""
    url = make_url(database_url)
    if url.get_backend_name() != "sqlite":
        plain = URL.create(
            "postgresql", username=url.username, host=url.host, port=url.port, database=url.database
        ).render_as_string()
        raise UseDatabaseTools(PG_GUIDANCE.format(url=plain))
    if not url.database or url.database == ":memory:":
        raise BackupError("an in-memory SQLite database has nothing to back up")
    return Path(url.database)


def _integrity(path: Path) -> str:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return conn.execute("PRAGMA integrity_check").fetchone()[0]
    finally:
        conn.close()


def _copy(src_path: Path, dst_path: Path, *, standalone: bool = True) -> None:
    src = sqlite3.connect(f"file:{src_path}?mode=ro", uri=True)
    dst = sqlite3.connect(dst_path)
    try:
        src.backup(dst)
        if standalone:
            # One self-contained file: no -wal/-shm beside the copy (the app turns WAL back on when it opens it).
            dst.execute("PRAGMA journal_mode=DELETE")
    finally:
        dst.close()
        src.close()


def backup_sqlite(database_url: str, out: Path, *, overwrite: bool = False) -> Path:
    """Copy the live database to ``out`` (refused if ``out`` exists, unless ``overwrite``)."""
    src = sqlite_path(database_url)
    if not src.exists():
        raise BackupError(f"there is no database at {src}")
    out = Path(out)
    if out.exists() and not overwrite:
        raise BackupError(f"{out} already exists; choose another name or pass --force")
    if not out.parent.exists():
        raise BackupError(f"the folder {out.parent} does not exist")
    tmp = out.with_name(out.name + ".partial")
    tmp.unlink(missing_ok=True)
    _copy(src, tmp)
    check = _integrity(tmp)
    if check != "ok":
        tmp.unlink(missing_ok=True)
        raise BackupError(f"the copy failed its integrity check ({check}); the database itself may be damaged")
    os.replace(tmp, out)
    return out


def daily_backup(database_url: str, folder: Path, keep: int, today: date | None = None) -> Path | None:
    """Today's backup in ``folder`` (None if it already exists); then delete all but the newest ``keep``."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    today = today or datetime.now(UTC).date()
    target = folder / f"panelwright-{today.isoformat()}.db"
    made = None
    if not target.exists():
        made = backup_sqlite(database_url, target)
    dailies = sorted(p for p in folder.iterdir() if DAILY_RE.match(p.name))
    for old in dailies[: max(len(dailies) - keep, 0)]:
        old.unlink()
    return made


def start_daily_backups(database_url: str, folder: str, keep: int, *, check_every_s: float = 3600.0) -> threading.Event:
    """Run :func:`daily_backup` now and then every ``check_every_s`` in a daemon thread; set the event to stop."""
    stop = threading.Event()

    def loop() -> None:
        while not stop.is_set():
            try:
                made = daily_backup(database_url, Path(folder), keep)
                if made:
                    log.info("daily backup written to %s", made)
            except BackupError as exc:
                log.error("daily backup failed: %s", exc)
            except Exception:  # keep serving; the log says what broke
                log.exception("daily backup failed")
            stop.wait(check_every_s)

    threading.Thread(target=loop, name="panelwright-daily-backup", daemon=True).start()
    return stop


# --------------------------------------------------------------------------- restore


def newest_change(database_url: str) -> datetime | None:
    """The newest audit row or project update in a database (None when it holds neither)."""
    from sqlalchemy import create_engine, inspect

    from server import audit
    from server.db.session import make_sessionmaker

    engine = create_engine(database_url)
    try:
        tables = set(inspect(engine).get_table_names())
        if not {"projects", "audit_events"} <= tables:
            return None
        return audit.newest_change(make_sessionmaker(engine))
    finally:
        engine.dispose()


@dataclass(frozen=True)
class RestoreOutcome:
    restored_from: Path
    kept_previous: Path | None
    backup_newest: datetime | None
    current_newest: datetime | None


def restore_sqlite(database_url: str, backup: Path, *, force: bool = False) -> RestoreOutcome:
    target = sqlite_path(database_url)
    backup = Path(backup)
    if not backup.is_file():
        raise BackupError(f"there is no backup file {backup}")
    try:
        check = _integrity(backup)
    except sqlite3.DatabaseError as exc:
        raise BackupError(f"{backup} is not a SQLite database ({exc})") from None
    if check != "ok":
        raise BackupError(f"{backup} fails its integrity check ({check}); choose another backup")
    backup_newest = newest_change(f"sqlite:///{backup}")
    current_newest = newest_change(database_url) if target.exists() else None
    if current_newest is not None and not force:
        if backup_newest is None or current_newest > backup_newest:
            raise BackupError(
                f"the database {target} changed after this backup was made (database: {_when(current_newest)}, "
                f"backup: {_when(backup_newest)}); restoring would lose those changes. Pass --force to restore anyway."
            )
    kept = None
    if target.exists():
        kept = target.with_name(f"{target.name}.before-restore-{datetime.now(UTC).strftime('%Y%m%dT%H%M%SZ')}")
        _copy(target, kept)
    try:
        _copy(backup, target, standalone=False)
    except sqlite3.OperationalError as exc:
        raise BackupError(f"cannot write {target} ({exc}): stop `panelwright serve` first, then restore") from None
    from server.db import migrate

    migrate.upgrade(database_url)
    return RestoreOutcome(backup, kept, backup_newest, current_newest)


def _when(stamp: datetime | None) -> str:
    return stamp.astimezone(UTC).strftime("%Y-%m-%d %H:%M:%S UTC") if stamp else "no changes recorded"
