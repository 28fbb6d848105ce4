"""Fixtures of the team-use tests: the web tests' database, app, signed-in client and demo project.

``db_url`` runs each database test on SQLite and on PostgreSQL (``PANELWRIGHT_TEST_PG_URL``;
skipped locally when unset, a failure in CI), exactly as in tests/integration/web.
"""

from __future__ import annotations

from tests.integration.web.conftest import (  # noqa: F401 - fixtures
    _pg_database,
    _sqlite_template,
    app,
    client,
    db_url,
    demo_data,
    demo_id,
)
