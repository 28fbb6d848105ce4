"""``panelwright schema [--out FILE]``: print (or write) the JSON Schema of the version-1 project file."""

from __future__ import annotations

from pathlib import Path

import click

from . import fail


@click.command("schema")
@click.option(
    "--out",
    "-o",
    "out",
    type=click.Path(dir_okay=False, path_type=Path),
    default=None,
    help="Write the schema to FILE instead of standard output.",
)
def command(out: Path | None) -> None:
    """Print the JSON Schema (draft 2020-12) that every project file follows."""
    from server.schema import schema_text  # pydantic is only needed here, not for every command

    text = schema_text()
    if out is None:
        click.echo(text, nl=False)
        return
    try:
        out.write_text(text, encoding="utf-8")
    except OSError as exc:
        fail(f"cannot write {out}: {exc.strerror}")
    click.echo(f"schema written to {out}", err=True)
