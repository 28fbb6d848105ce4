"""``panelwright serve``: run the web app with uvicorn (127.0.0.1:8000 unless told otherwise)."""

from __future__ import annotations

import click

from server.config import Settings
from server.db.migrate import DatabaseNotMigrated

from . import CAUTION, fail
from .team import start_team_tasks, team_checks


@click.command("serve")
@click.option("--host", default=None, help="Address to bind (default 127.0.0.1; 0.0.0.0 opens it to the LAN)")
@click.option("--port", default=None, type=click.IntRange(1, 65535), help="Port (default 8000)")
@click.option(
    "--single-user", is_flag=True, default=None, help="One person on this machine: no sign-in (loopback addresses only)"
)
def command(host: str | None, port: int | None, single_user: bool | None) -> None:
    """Serve the web app to browsers (this machine only, unless --host says otherwise)."""
    import uvicorn

    from server.web.app import create_app
    from server.web.serving import prepare_process

    settings = Settings()
    settings = settings.model_copy(update={"host": host or settings.host, "port": port or settings.port})
    if single_user:
        settings = settings.model_copy(update={"single_user": True})
    team_checks(settings)
    try:
        app = create_app(settings)
    except DatabaseNotMigrated as exc:
        fail(str(exc))
    click.echo(f"Panelwright on http://{settings.host}:{settings.port}/  (database {settings.database_url})", err=True)
    click.echo(CAUTION, err=True)
    start_team_tasks(settings)
    prepare_process(settings)
    uvicorn.run(app, host=settings.host, port=settings.port, log_level=settings.log_level)
