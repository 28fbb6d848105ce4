"""``panelwright pdf``: the submittal PDF set of a project file (or of a stored project).

    panelwright pdf FILE.json|PROJECT --out SET.pdf [--sheets LP-1,T-1]
        [--revision N --revision-date YYYY-MM-DD --revision-description TEXT --issued-by JK]
        [--previous OLD.json]

FILE is tried first; otherwise PROJECT is a project number or id in the database
(``PANELWRIGHT_DATABASE_URL``).  ``--previous`` is the project file of the previous issued
revision: rows and values changed since then carry a revision delta marker.
"""

from __future__ import annotations

import sys
from pathlib import Path

import click
from pydantic import ValidationError

from server.calc.errors import CalcError, ProjectFileError
from server.calc.projectfile import load_project_file

from . import CAUTION, fail


def _progress(enabled: bool):  # type: ignore[no-untyped-def]
    state = {"last": -1}

    def report(done: int, total: int) -> None:
        if not enabled or done == state["last"]:
            return
        state["last"] = done
        end = "\n" if done >= total else ""
        click.echo(f"\rsheets {done}/{total}", err=True, nl=False)
        if end:
            click.echo("", err=True)

    return report


@click.command("pdf")
@click.argument("source")
@click.option(
    "--out", "-o", "out", required=True, type=click.Path(dir_okay=False, path_type=Path), help="PDF file to write"
)
@click.option(
    "--sheets",
    default=None,
    help="Only these sheets: panel, transformer or source tags, or sheet numbers (comma-separated)",
)
@click.option(
    "--previous",
    type=click.Path(dir_okay=False, path_type=Path),
    default=None,
    help="Project file of the previous issued revision: changes since then are marked",
)
@click.option(
    "--revision", type=click.IntRange(min=0), default=None, help="Revision number being issued (none: a draft)"
)
@click.option("--revision-date", default="", help="Date of the revision (printed as given, e.g. 2026-12-01)")
@click.option("--revision-description", default="", help="What the revision is for")
@click.option("--issued-by", default="", help="Initials of who issues it")
@click.option(
    "--include-future/--exclude-future", default=None, help="Count future circuits (default: the project's setting)"
)
@click.option("--workers", type=click.IntRange(min=1), default=None, help="Render processes (default: every core)")
@click.option(
    "--cache-dir",
    type=click.Path(file_okay=False, path_type=Path),
    default=None,
    help="Sheet cache (default: PANELWRIGHT_PDF_CACHE_DIR, else a temp dir)",
)
@click.option("--no-cache", is_flag=True, help="Render every sheet afresh and cache nothing")
def command(
    source: str,
    out: Path,
    sheets: str | None,
    previous: Path | None,
    revision: int | None,
    revision_date: str,
    revision_description: str,
    issued_by: str,
    include_future: bool | None,
    workers: int | None,
    cache_dir: Path | None,
    no_cache: bool,
) -> None:
    """Write the PDF set (cover and index, load calculations, transformer and panel schedules, warnings)."""
    from server.pdf.issue import compute, history_for, make_set
    from server.pdf.render import default_cache_dir
    from server.pdf.sheets import RevisionInfo

    if previous is not None and revision is None:
        fail("--previous needs --revision N (the revision being issued) so changes can be marked with it")
    if revision is None and (revision_date or revision_description):
        fail("--revision-date and --revision-description need --revision N")
    current = RevisionInfo(revision, revision_date, revision_description, issued_by) if revision is not None else None

    path = Path(source)
    growth = None  # load-growth sheets: a stored project with issued revisions only
    try:
        if path.exists() or source.endswith(".json"):
            project = load_project_file(path)
            result = compute(project, include_future)
            prev = load_project_file(previous) if previous is not None else None
            history = history_for(project, result, current=current, previous=prev)
        else:
            if previous is not None or current is not None:
                fail("--previous and --revision apply to a project FILE; a stored project uses its issued revisions")
            project, result, history, growth = _stored(source)
    except ProjectFileError as exc:
        fail(exc.describe())
    except CalcError as exc:
        fail(f"{source}: {exc}")

    select = [s for s in sheets.split(",") if s.strip()] if sheets else None
    try:
        cache = None if no_cache else (cache_dir or default_cache_dir(cli=True))
    except ValidationError as exc:  # a malformed PANELWRIGHT_ variable, named
        err = exc.errors()[0]
        fail(f"PANELWRIGHT_{str(err['loc'][0]).upper()}: {err['msg']}")
    try:
        pdf, stats = make_set(
            project,
            result,
            history,
            select=select,
            cache_dir=cache,
            workers=workers,
            progress=_progress(sys.stderr.isatty()),
            growth=growth,
        )
    except KeyError as exc:
        fail(
            f"--sheets: no sheet named {exc.args[0]} (use panel, transformer or source tags, sheet numbers, "
            "or index, warnings, transformers, growth)"
        )
    try:
        out.write_bytes(pdf)
    except OSError as exc:
        fail(f"{out}: cannot write ({exc.strerror})")
    click.echo(
        f"wrote {out}: {stats.sheets} sheets ({stats.rendered} rendered, {stats.from_cache} from cache), "
        f"{len(pdf) // 1024} KiB",
        err=True,
    )
    click.echo(CAUTION, err=True)


def _stored(key: str):  # type: ignore[no-untyped-def]
    """Model, result, history and growth charts of a project in the database (by number or id)."""
    from server.config import Settings
    from server.db.migrate import DatabaseNotMigrated, ensure_migrated
    from server.db.session import make_engine, make_sessionmaker
    from server.pdf.stored import stored_set
    from server.services import NotFound, Services

    settings = Settings()
    engine = make_engine(settings)
    try:
        ensure_migrated(engine)
    except DatabaseNotMigrated as exc:
        fail(f"{key} is not a file, and the database is not ready: {exc}")
    services = Services(make_sessionmaker(engine), cache_size=0)
    try:
        pid = services.find_project_id(key)
    except NotFound:
        fail(f"{key}: no such file, and no project with that number or id in the database")
    stored = stored_set(services, pid)
    return stored.model, stored.result, stored.history, stored.growth
