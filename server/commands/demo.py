"""``panelwright demo``: load the invented demo project (idempotent: it replaces an earlier demo)."""

from __future__ import annotations

import json
from pathlib import Path

import click

from server.config import Settings
from server.db.migrate import DatabaseNotMigrated
from server.services import EditRejected, Services

from . import fail

#: seed_demo/ sits beside server/ in the checkout (the console script does not put the checkout on sys.path).
DEMO_FILE = Path(__file__).resolve().parents[2] / "seed_demo" / "demo_project.json"


@click.command("demo")
def command() -> None:
    """Load seed_demo/demo_project.json into the database (running it again replaces the demo)."""
    try:
        svc = Services.from_settings(Settings())
    except DatabaseNotMigrated as exc:
        fail(str(exc))
    data = json.loads(DEMO_FILE.read_text(encoding="utf-8"))
    try:
        outcome = svc.import_file(data, replace_existing=True)
    except EditRejected as exc:
        fail(f"{DEMO_FILE}: {exc}")
    verb = "replaced" if outcome.replaced else "loaded"
    click.echo(f"demo project {data['project']['number']} {verb} (id {outcome.project_id})")
