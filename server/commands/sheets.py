"""``panelwright import-sheet`` and ``panelwright export-sheet``: spreadsheets from the command line.

``import-sheet`` reads an XLSX or CSV circuit table into one panel (or, without ``--panel``,
every sheet named after a panel and any table with a Panel column), one circuit per row or two
(odd slots in the left half, even in the right), prints the preview with each problem naming
the file, sheet, row, panel, slot, column and field, and writes only with ``--yes`` and no
errors.  ``export-sheet`` writes the project as XLSX (summary + one sheet per panel, one
circuit per row or ``--layout two-column``), CSV (circuits, plus ``<name>-summary.csv``) or the
version-1 project file (``.json``).
Both use the database named by ``PANELWRIGHT_DATABASE_URL``.
"""

from __future__ import annotations

import json
from pathlib import Path

import click

from server.commands import CAUTION, fail

MAX_PREVIEW_LINES = 60


def _services():  # noqa: ANN202 - imported lazily so `panelwright --help` does not load SQLAlchemy
    from server.config import get_settings
    from server.db.migrate import DatabaseNotMigrated, ensure_migrated
    from server.db.session import make_engine, make_sessionmaker
    from server.services import Services

    try:
        settings = get_settings()
    except Exception as exc:  # noqa: BLE001 - pydantic's validation error, shown as a message
        fail(f"bad setting: {exc}")
    engine = make_engine(settings)
    try:
        ensure_migrated(engine)
    except DatabaseNotMigrated as exc:
        fail(str(exc))
    except Exception as exc:  # noqa: BLE001 - cannot connect: say so, no traceback
        fail(f"cannot open the database: {exc}")
    return Services(make_sessionmaker(engine), cache_size=0)


def _find_project(services, key: str) -> int:  # noqa: ANN001
    from server.services import NotFound

    try:
        return services.find_project_id(key)
    except NotFound as exc:
        fail(str(exc))


def _preview_table(preview) -> list[str]:  # noqa: ANN001
    from server.calc.model import Category

    lines = []
    header = f"{'row':>5}  {'panel':<8} {'slot':>4} {'P':>1} {'phase':<5} {'VA':>10} {'trip':>5}  {'category':<11} description"
    lines.append(header)
    for r in preview.rows:
        half = f" {r.side}" if r.side else ""
        if r.ignored:
            lines.append(f"{r.sheet_row:>5}  (not imported{half}: {r.ignored})")
            continue
        c = r.circuit
        mark = " !" if r.has_error else (" ?" if r.problems else "")
        if c is None:
            lines.append(f"{r.sheet_row:>5}  (not readable){mark}")
            continue
        va = "" if c.va is None else f"{c.va:,.0f}"
        trip = "" if c.breaker_amps is None else str(c.breaker_amps)
        cat = (c.category or Category.EQUIPMENT).value
        slot = f"{c.slot}*" if r.slot_inferred else str(c.slot)
        lines.append(
            f"{r.sheet_row:>5}  {r.panel or '':<8} {slot:>4} {c.poles:>1} {''.join(r.phases):<5} {va:>10} "
            f"{trip:>5}  {cat:<11} {c.description}{mark}{' (' + r.side + ' half)' if r.side else ''}"
        )
    return lines


@click.command("import-sheet")
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--project", "project_key", required=True, help="Project number or id.")
@click.option("--panel", "panel_tag", default=None, help="Panel tag to fill; omit to match sheets to panels by name.")
@click.option("--sheet", "sheet_name", default=None, help="Worksheet to read (default: the first).")
@click.option(
    "--mapping",
    "mapping_json",
    default=None,
    help='Column corrections as JSON (see below), e.g. \'{"columns": {"E": "kva"}}\'.',
)
@click.option("--yes", "confirm", is_flag=True, help="Write the circuits (without it, only the preview is printed).")
def import_sheet(
    file: Path, project_key: str, panel_tag: str | None, sheet_name: str | None, mapping_json: str | None, confirm: bool
) -> None:
    """Import circuits from an XLSX or CSV FILE into a panel of a project.

    Without --yes nothing is written: the preview is printed.  With --yes the panel's circuits
    are replaced only if no row has an error.

    \b
    The header row and what each column holds are guessed; --mapping corrects them:
      {"header_row": 4, "columns": {"C": "kva", "Trip": "breaker"}}
    header_row is the sheet row of the (last) header row; columns keys are column letters or
    header text; roles: slot, description, va, kva, amps, poles, breaker, phase, category,
    notes, status, pf, continuous, feeds, locked, harmonic3_pct, panel, ignore.

    \b
    Two circuits per row (odd slots in the left half, even in the right) is detected when the
    header repeats; set or correct it with:
      {"layout": "two-column", "right_starts": "G",
       "left": {"kVA": "kva"}, "right": {"kVA": "va"}, "columns": {"F": "phase"}}
    layout is "single" or "two-column"; right_starts is the letter of the right half's first
    column; left / right look header text up within that half (headers repeat across halves);
    columns take letters anywhere.  A phase or panel column serves both halves.  A half
    without a slot column takes the slot beside the other half's, or its place in the row
    order (marked * in the preview).
    """
    from server.services import Conflict, NotFound
    from server.sheets import MappingError, SheetFileError, plan_sheets, preview_upload, read_upload
    from server.sheets.limits import max_upload_bytes
    from server.sheets.mapping import column_letter
    from server.sheets.store import replace_panel_circuits

    try:
        limit = max_upload_bytes()
        size = file.stat().st_size
    except SheetFileError as exc:
        fail(exc.describe())
    except FileNotFoundError:
        fail(f"{file}: no such file")
    except OSError as exc:
        fail(f"{file}: cannot be read ({exc.strerror})")
    if size > limit:
        fail(
            f"{file.name}: the file is {size / 1048576:.1f} MB; uploads are limited to {limit / 1048576:.1f} MB "
            "(setting PANELWRIGHT_MAX_UPLOAD_MB)"
        )
    try:
        data = file.read_bytes()
    except OSError as exc:
        fail(f"{file}: cannot be read ({exc.strerror})")
    services = _services()
    project_id = _find_project(services, project_key)
    snap = services.snapshot(project_id)
    if panel_tag is not None and snap.model.panel(panel_tag) is None:
        tags = ", ".join(p.tag for p in snap.model.panels) or "none"
        fail(f"project {project_key} has no panel {panel_tag!r} (panels: {tags})")
    try:
        book = read_upload(data, file.name, limit_bytes=limit)
        plans = plan_sheets(book, snap.model, panel=panel_tag, sheet=sheet_name, mapping=mapping_json)
        preview = preview_upload(book, plans, snap.model)
    except (SheetFileError, MappingError) as exc:
        fail(str(exc))
    for plan in plans:
        target = plan.panel or "(Panel column)"
        cmap = plan.mapping
        layout = (
            "" if cmap.split is None else f"; two circuits per row, right half from column {column_letter(cmap.split)}"
        )
        click.echo(f"sheet {plan.sheet!r} → {target}; header row {cmap.header_row + 1}{layout}; columns:")
        for i, role in enumerate(cmap.roles):
            head = cmap.headers[i] if i < len(cmap.headers) else ""
            side = cmap.side_of(i)
            half = f" ({side.value})" if side is not None else ""
            click.echo(f"  {column_letter(i):>2} {head[:30]!r:<32} → {role.value}{half}")
        click.echo(f"  as --mapping: {json.dumps(cmap.to_json())}")
    for line in _preview_table(preview):
        click.echo(line)
    for note in preview.notes:
        click.echo(f"note: {note}")
    lines = preview.problem_lines()
    for line in lines[:MAX_PREVIEW_LINES]:
        click.echo(line, err=True)
    if len(lines) > MAX_PREVIEW_LINES:
        click.echo(f"... and {len(lines) - MAX_PREVIEW_LINES} more problems", err=True)
    counts = ", ".join(f"{tag}: {len(cs)} circuits" for tag, cs in preview.circuits.items())
    click.echo(f"{preview.error_count} errors, {preview.warning_count} warnings; {counts or 'no circuits'}")
    if preview.error_count:
        fail(f"{file.name}: {preview.error_count} errors; nothing was written. Fix the sheet or the mapping")
    if not confirm:
        click.echo("preview only: nothing was written (add --yes to replace the circuits)")
        return
    try:
        replace_panel_circuits(services, project_id, preview.circuits_by_panel(), expected_version=snap.data_version)
    except (Conflict, NotFound) as exc:
        fail(str(exc))
    click.echo(f"written: {counts}")


@click.command("export-sheet")
@click.argument("project_key", metavar="PROJECT")
@click.option(
    "--out",
    "out",
    required=True,
    type=click.Path(dir_okay=False, path_type=Path),
    help="FILE.xlsx (summary + a sheet per panel), FILE.csv (circuits and FILE-summary.csv) or FILE.json.",
)
@click.option(
    "--layout",
    type=click.Choice(["single", "two-column"]),
    default="single",
    show_default=True,
    help="XLSX panel sheets: one circuit per row, or two (odd slots left, even right, phase between).",
)
def export_sheet(project_key: str, out: Path, layout: str) -> None:
    """Export PROJECT (number or id) as XLSX, CSV or the version-1 project file."""
    from server.calc.projectfile import dumps_project
    from server.sheets.export import circuits_csv, project_xlsx, summary_csv
    from server.sheets.mapping import Layout

    ext = out.suffix.lower()
    if ext not in (".xlsx", ".csv", ".json"):
        fail(f"{out}: choose an .xlsx, .csv or .json file name")
    if layout != "single" and ext != ".xlsx":
        fail(f"{out}: --layout {layout} applies to .xlsx workbooks; CSV and JSON hold one circuit per row")
    services = _services()
    snap = services.snapshot(_find_project(services, project_key))
    try:
        if ext == ".xlsx":
            out.write_bytes(project_xlsx(snap.model, snap.result, layout=Layout(layout)))
            written = [out]
        elif ext == ".csv":
            summary = out.with_name(f"{out.stem}-summary.csv")
            out.write_bytes(circuits_csv(snap.model))
            summary.write_bytes(summary_csv(snap.model, snap.result))
            written = [out, summary]
        else:
            out.write_text(dumps_project(snap.model), encoding="utf-8")
            written = [out]
    except OSError as exc:
        fail(f"{out}: cannot be written ({exc.strerror})")
    for path in written:
        click.echo(f"wrote {path}")
    if ext != ".json":
        click.echo(CAUTION)


commands = [import_sheet, export_sheet]
command = import_sheet  # for a loader that reads only ``command``; ``commands`` lists both
