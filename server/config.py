"""Settings of the web app and the CLI, read from the environment (prefix ``PANELWRIGHT_``).

Every setting is documented in DEVELOPERS.md (a test checks).  Nothing here is secret: the
app serves one office LAN and needs no key to run locally.
"""

from __future__ import annotations

from pydantic import Field, field_validator
from pydantic_settings import BaseSettings, SettingsConfigDict

DEFAULT_DATABASE_URL = "sqlite:///./panelwright.db"


class Settings(BaseSettings):
    """Typed settings; each field is ``PANELWRIGHT_<NAME>`` in the environment."""

    model_config = SettingsConfigDict(env_prefix="PANELWRIGHT_", extra="ignore")

    database_url: str = Field(
        DEFAULT_DATABASE_URL,
        description="SQLAlchemy URL: sqlite:///path.db (default ./panelwright.db) or postgresql+psycopg://user:pw@host/db",
    )
    host: str = Field("127.0.0.1", description="Address `panelwright serve` binds; 0.0.0.0 opens it to the LAN")
    port: int = Field(8000, ge=1, le=65535, description="TCP port `panelwright serve` listens on")
    sqlite_busy_timeout_ms: int = Field(
        5000, ge=0, description="How long a SQLite writer waits for another writer's lock before failing"
    )
    log_level: str = Field("info", description="Log level of the server (debug, info, warning, error)")
    bench_endpoints: bool = Field(
        False, description="Adds the bare benchmark endpoint used by tests/benchmarks/bench_web.py (off in production)"
    )
    gc_young_threshold: int = Field(
        20_000,
        ge=0,
        description=(
            "Young-generation threshold of Python's garbage collector in the serving process "
            "(0 keeps Python's default; read by server/web/serving.py)"
        ),
    )
    calc_cache_size: int = Field(
        8, ge=0, description="How many projects keep an in-memory calculator for incremental recompute"
    )
    # Team use (accounts, sessions, backups): see docs/lan.md.
    single_user: bool = Field(
        False, description="One person on this machine: no sign-in, every request acts as a local admin (loopback only)"
    )
    secret_key: str | None = Field(
        None, description="Signs session cookies; unset, the server makes one and keeps it in the database"
    )
    session_hours: float = Field(12.0, gt=0, description="How long a sign-in lasts before the session expires")
    cookie_secure: bool = Field(
        False, description="Mark the session cookie Secure (set it when a reverse proxy serves HTTPS)"
    )
    login_max_failures: int = Field(
        5, ge=1, description="Failed sign-ins allowed per user name within the window (4× that per address)"
    )
    login_window_s: int = Field(300, ge=1, description="Window of the failed sign-in limit, in seconds")
    backup_dir: str | None = Field(
        None, description="Folder of the daily backups `serve` makes (unset: no scheduled backup)"
    )
    max_upload_mb: float = Field(
        10.0, gt=0, description="Largest spreadsheet upload accepted, in megabytes (read by server/sheets/limits.py)"
    )
    pdf_cache_dir: str | None = Field(
        None,
        description=(
            "Where rendered PDF sheets are cached by content hash; unset: ./var/pdf-cache for the server, "
            "a temporary folder for the CLI (read by server/pdf/render.py)"
        ),
    )
    pdf_keep_sets: int = Field(
        20,
        ge=1,
        description=(
            "Finished PDF sets kept per project in <pdf cache>/sets (older ones are deleted when a new set "
            "finishes; read by server/pdf/jobs.py)"
        ),
    )
    backup_keep: int = Field(14, ge=1, description="How many daily backups to keep in the backup folder")

    @field_validator("database_url")
    @classmethod
    def _known_backend(cls, value: str) -> str:
        if not (value.startswith("sqlite") or value.startswith("postgresql")):
            raise ValueError("must be a sqlite:/// or postgresql+psycopg:// URL")
        return value


def get_settings() -> Settings:
    """Fresh settings from the environment (tests build their own ``Settings``)."""
    return Settings()
