"""Fixtures of the web tests: a migrated database (SQLite, and PostgreSQL when available), the app over HTTP.

Every database test runs twice, once per backend (``db_url`` is parametrised over "sqlite" and
"postgres").  PostgreSQL comes from ``PANELWRIGHT_TEST_PG_URL``: a URL to the server's
maintenance database with a role that may create databases, e.g.
``postgresql+psycopg://panelwright@127.0.0.1:5432/postgres``.  The session creates a uniquely
named database there, migrates it with Alembic, empties it before each test and drops it at
the end.  Unset locally, the PostgreSQL runs are skipped; unset with ``CI`` set, they fail.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import uuid
from collections.abc import Iterator
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

from server.config import Settings
from server.db import migrate
from server.db.models import Base
from server.web.app import create_app
from tests.helpers import DEMO_FILE

PG_ENV = "PANELWRIGHT_TEST_PG_URL"


@pytest.fixture(scope="session")
def _sqlite_template(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """One SQLite file migrated by Alembic; each test gets a copy (migrating once is faster)."""
    path = tmp_path_factory.mktemp("template") / "template.db"
    migrate.upgrade(f"sqlite:///{path}")
    return path


@pytest.fixture(scope="session")
def _pg_database() -> Iterator[str]:
    base = os.environ.get(PG_ENV)
    if not base:
        if os.environ.get("CI"):
            pytest.fail(f"{PG_ENV} is not set: CI must run the PostgreSQL half of the database tests")
        pytest.skip(f"PostgreSQL tests need {PG_ENV} (a maintenance-database URL); skipped locally")
    name = f"panelwright_test_{uuid.uuid4().hex[:12]}"
    admin = create_engine(base, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    url = make_url(base).set(database=name).render_as_string(hide_password=False)
    try:
        migrate.upgrade(url)
        yield url
    finally:
        with admin.connect() as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


def _empty_pg(url: str) -> None:
    engine = create_engine(url)
    tables = ", ".join(f'"{t.name}"' for t in Base.metadata.sorted_tables)
    with engine.begin() as conn:
        conn.execute(text(f"TRUNCATE {tables} RESTART IDENTITY CASCADE"))
    engine.dispose()


@pytest.fixture(params=["sqlite", "postgres"])
def db_url(request: pytest.FixtureRequest, tmp_path: Path) -> str:
    """A migrated, empty database for one test."""
    if request.param == "sqlite":
        path = tmp_path / "panelwright.db"
        shutil.copy(request.getfixturevalue("_sqlite_template"), path)
        return f"sqlite:///{path}"
    url = request.getfixturevalue("_pg_database")
    _empty_pg(url)
    return url


@pytest.fixture
def app(db_url: str) -> Iterator:
    application = create_app(Settings(database_url=db_url, bench_endpoints=True))
    yield application
    application.state.engine.dispose()


@pytest.fixture
def client(app) -> Iterator[TestClient]:
    """A browser signed in as an engineer, sending the page's CSRF token on every request."""
    with TestClient(app, raise_server_exceptions=False) as c:
        sign_in(c, app, "engineer")
        yield c


def sign_in(c: TestClient, app, role: str, name: str | None = None) -> None:
    """Create a user with ``role`` (named after it unless ``name``), sign ``c`` in, and keep its CSRF token."""
    from server.auth.accounts import add_user, list_users

    name = name or role
    if name not in {u.name for u in list_users(app.state.services.sessions)}:
        add_user(app.state.services.sessions, name=name, role=role, password=TEST_PASSWORD)
    c.headers.pop("X-CSRF-Token", None)
    page = c.get("/login")
    token = re.search(r'name="csrf_token" value="([0-9a-f]+)"', page.text).group(1)
    r = c.post("/login", data={"name": name, "password": TEST_PASSWORD, "csrf_token": token}, follow_redirects=False)
    assert r.status_code == 303, r.text
    home = c.get("/")
    c.headers["X-CSRF-Token"] = re.search(r'<meta name="csrf-token" content="([0-9a-f]+)"', home.text).group(1)


TEST_PASSWORD = "correct-horse-battery"


@pytest.fixture
def demo_data() -> dict:
    return json.loads(DEMO_FILE.read_text(encoding="utf-8"))


@pytest.fixture
def demo_id(app, demo_data: dict) -> int:
    """The demo project loaded through the service (the same path as `panelwright demo`)."""
    return app.state.services.import_file(demo_data).project_id


def htmx(trigger: str | None = None) -> dict[str, str]:
    """Headers htmx sends for an edit triggered by the field ``trigger``."""
    headers = {"HX-Request": "true"}
    if trigger:
        headers["HX-Trigger-Name"] = trigger
    return headers
