"""``panelwright import FILE``: store a version-1 project file as a project (the web app's import path)."""

from __future__ import annotations

from pathlib import Path

import click

from server.calc.errors import ProjectFileError
from server.calc.projectfile import dump_project, load_project_file
from server.config import Settings
from server.db.migrate import DatabaseNotMigrated
from server.services import EditRejected, Services

from . import fail


@click.command("import")
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--replace", is_flag=True, help="Replace the stored project with the same number instead of refusing")
def command(file: Path, replace: bool) -> None:
    """Import FILE (a version-1 project file) into the database."""
    try:
        model = load_project_file(file)
    except ProjectFileError as exc:
        fail(exc.describe())
    try:
        svc = Services.from_settings(Settings())
    except DatabaseNotMigrated as exc:
        fail(str(exc))
    try:
        outcome = svc.import_file(dump_project(model), replace_existing=replace)
    except EditRejected as exc:
        hint = " (use --replace to overwrite it)" if any(p.field == "project.number" for p in exc.problems) else ""
        fail(f"{file}: {exc}{hint}")
    verb = "replaced" if outcome.replaced else "imported as"
    click.echo(f"{file}: {verb} project id {outcome.project_id} (number {model.project.number or '—'})")
