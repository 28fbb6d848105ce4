"""Engines and sessions, built from settings (never at import time).

SQLite gets WAL journalling (readers never block the writer), foreign keys on and a busy
timeout, set on every new connection by a connect event listener.  PostgreSQL needs nothing
special: the same SQL runs on both.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import Engine, create_engine, event
from sqlalchemy.orm import Session, sessionmaker

from server.config import Settings


def is_sqlite(url: str) -> bool:
    return url.startswith("sqlite")


def make_engine(settings: Settings) -> Engine:
    """A new engine for ``settings.database_url``."""
    url = settings.database_url
    if is_sqlite(url):
        engine = create_engine(url, connect_args={"check_same_thread": False})
        busy_ms = settings.sqlite_busy_timeout_ms

        @event.listens_for(engine, "connect")
        def _sqlite_pragmas(dbapi_connection: Any, _record: Any) -> None:
            cursor = dbapi_connection.cursor()
            cursor.execute("PRAGMA journal_mode=WAL")
            cursor.execute("PRAGMA foreign_keys=ON")
            cursor.execute(f"PRAGMA busy_timeout={int(busy_ms)}")
            # WAL with synchronous=NORMAL is durable across application crashes (common practice).
            cursor.execute("PRAGMA synchronous=NORMAL")
            cursor.close()

        return engine
    return create_engine(url, pool_pre_ping=True)


def make_sessionmaker(engine: Engine) -> sessionmaker[Session]:
    return sessionmaker(bind=engine, expire_on_commit=False)
