"""``panelwright export PROJECT --out FILE``: write a stored project as a version-1 project file."""

from __future__ import annotations

import json
from pathlib import Path

import click

from server.config import Settings
from server.db.migrate import DatabaseNotMigrated
from server.services import NotFound, Services

from . import fail


@click.command("export")
@click.argument("project")
@click.option(
    "--out",
    "-o",
    "out",
    required=True,
    type=click.Path(dir_okay=False, path_type=Path),
    help="File to write ('-' for standard output)",
)
def command(project: str, out: Path) -> None:
    """Export PROJECT (its number or id) to a version-1 project file."""
    try:
        svc = Services.from_settings(Settings())
    except DatabaseNotMigrated as exc:
        fail(str(exc))
    try:
        data = svc.export_file(svc.find_project_id(project))
    except NotFound as exc:
        fail(str(exc))
    text = json.dumps(data, indent=2, ensure_ascii=False) + "\n"
    if str(out) == "-":
        click.echo(text, nl=False)
        return
    try:
        out.write_text(text, encoding="utf-8")
    except OSError as exc:
        fail(f"cannot write {out}: {exc.strerror}")
    click.echo(f"project {data['project']['number'] or project} written to {out}", err=True)
