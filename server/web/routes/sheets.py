"""Spreadsheet screens: upload, correct the column mapping while the preview updates, confirm; exports.

Flow: ``POST …/sheets/upload`` checks the file (size, zip headers, macros, readability) and
holds it under a token (:mod:`server.sheets.uploads`); ``GET …/sheets/imports/{token}`` shows
the guessed mapping and the preview; every change of a mapping control posts the form to
``…/preview`` (htmx swaps the work area; without htmx the whole page comes back); ``…/commit``
rebuilds the preview on the project as it is now and writes only if it has no errors and the
project did not change meanwhile; ``…/discard`` drops the upload.  Nothing is written before
the confirmation, and a refused confirmation writes nothing.

The rules are the engine's (:mod:`server.sheets.importer` calls
:mod:`server.calc.projectfile`); this module only parses the form and arranges the context.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import PurePath
from typing import Any
from urllib.parse import quote, urlencode

from fastapi import APIRouter, Request
from fastapi.concurrency import run_in_threadpool
from fastapi.responses import RedirectResponse, Response
from starlette.datastructures import UploadFile

from server.calc.model import Circuit, Status
from server.services import Conflict, NotFound, Services, Snapshot
from server.sheets import MappingError, SheetFileError, SheetPlan, plan_sheets, preview_upload, read_upload
from server.sheets.export import circuits_csv, project_xlsx, summary_csv
from server.sheets.importer import ImportPreview, PreviewRow
from server.sheets.limits import check_size, max_upload_bytes
from server.sheets.mapping import (
    ROLE_LABELS,
    SHARED_ROLES,
    ColumnMap,
    Layout,
    Role,
    Side,
    column_index,
    column_letter,
    mapping_at,
)
from server.sheets.reader import Book, Grid
from server.sheets.store import replace_panel_circuits
from server.sheets.uploads import HeldUpload, UploadStore
from server.web.deps import HtmxDep, ServicesDep, TemplatesDep
from server.web.views import Page, page

router = APIRouter(tags=["sheets"])

BASE = "/projects/{pid}/sheets"
WORK = BASE + "/imports/{token}"
SAMPLE_ROWS = 3
AUTO = "auto"  # target: every sheet named after a panel, or split by a Panel column

#: Where uploads wait for confirmation; tests may set ``app.state.sheet_uploads``.
DEFAULT_UPLOADS = UploadStore()


class SheetUrls:
    """URLs of the spreadsheet screens (kept beside their routes)."""

    def index(self, pid: int) -> str:
        return f"/projects/{pid}/sheets"

    def upload(self, pid: int) -> str:
        return f"/projects/{pid}/sheets/upload"

    def work(self, pid: int, token: str, **query: str) -> str:
        q = f"?{urlencode(query)}" if query else ""
        return f"/projects/{pid}/sheets/imports/{token}{q}"

    def preview(self, pid: int, token: str) -> str:
        return f"/projects/{pid}/sheets/imports/{token}/preview"

    def commit(self, pid: int, token: str) -> str:
        return f"/projects/{pid}/sheets/imports/{token}/commit"

    def discard(self, pid: int, token: str) -> str:
        return f"/projects/{pid}/sheets/imports/{token}/discard"

    def export(self, pid: int, name: str) -> str:
        return f"/projects/{pid}/sheets/{name}"

    def project_file(self, pid: int) -> str:
        return f"/projects/{pid}/export"

    def panel(self, pid: int, tag: str) -> str:
        return f"/projects/{pid}/panels/{quote(tag, safe='')}"


SHEET_URLS = SheetUrls()

# --------------------------------------------------------------------------- contexts


@dataclass(frozen=True)
class SheetsIndexContext:
    """The spreadsheet page: the upload form and the export links."""

    page: Page
    pid: int
    panels: tuple[str, ...]  # panel tags, the upload form's choices
    max_upload_mb: float
    target: str = ""  # the chosen panel tag, or "auto"
    error: str = ""  # why the last upload was refused
    notice: str = ""  # e.g. "the import was discarded"
    urls: SheetUrls = SHEET_URLS


@dataclass(frozen=True)
class ColumnView:
    """One column of a sheet in the mapping table."""

    index: int
    letter: str
    header: str
    role: str
    samples: tuple[str, ...]  # the first few data values, as read
    side: str = ""  # two-column layout: "left" or "right"


@dataclass(frozen=True)
class PlanView:
    """One sheet → panel block of the mapping form."""

    index: int
    sheet: str
    panel: str  # "" = the sheet's Panel column names each row's panel
    header_row: int  # 1-based
    columns: tuple[ColumnView, ...]
    single: bool  # one sheet into one chosen panel: the sheet and panel can be changed
    layout: str = Layout.SINGLE.value
    split: str = ""  # two-column layout: letter of the right half's first column

    @property
    def halves(self) -> str:
        """The two-column layout in words: which columns are the left and the right half."""
        if self.layout != Layout.TWO_COLUMN.value or not self.split or not self.columns:
            return ""
        cut = column_index(self.split) or 0
        first, last = self.columns[0].letter, self.columns[-1].letter
        before = column_letter(max(cut - 1, 0))
        return (
            f"columns {first}–{before} are the left half (odd slots), {self.split}–{last} the right half (even slots)"
        )


@dataclass(frozen=True)
class RowView:
    """One preview row: the circuit as it will be stored, problems keyed by stored field."""

    sheet: str
    sheet_row: int
    panel: str
    ignored: str
    side: str = ""  # two-column layout: the half of the sheet row
    slot_inferred: bool = False
    slot: str = ""
    poles: str = ""
    phases: str = ""
    description: str = ""
    category: str = ""
    va: str = ""
    breaker: str = ""
    notes: str = ""
    other: str = ""  # the other stored fields that differ from their defaults (pf, status ...)
    marks: dict[str, str] = field(default_factory=dict)  # stored field → "error" / "warning"
    problems: tuple[tuple[str, str, str], ...] = ()  # (severity, where, message)

    @property
    def level(self) -> str:
        if any(s == "error" for s, _, _ in self.problems):
            return "error"
        return "warning" if self.problems else ("ignored" if self.ignored else "ok")


@dataclass(frozen=True)
class ImportContext:
    """The mapping screen: the mapping form, the preview and the confirm/discard buttons."""

    page: Page
    pid: int
    token: str
    filename: str
    plans: tuple[PlanView, ...]
    rows: tuple[RowView, ...]
    problems: tuple[str, ...]  # problems of the import as a whole
    notes: tuple[str, ...]  # what the import assumed (slots from the row order ...)
    error_count: int
    warning_count: int
    can_commit: bool
    circuit_counts: tuple[tuple[str, int], ...]
    expected_version: int
    sheet_names: tuple[str, ...]
    panels: tuple[str, ...]
    roles: tuple[tuple[str, str], ...] = tuple((r.value, ROLE_LABELS[r]) for r in Role)
    layouts: tuple[tuple[str, str], ...] = (
        (Layout.SINGLE.value, "One circuit per row"),
        (Layout.TWO_COLUMN.value, "Two circuits per row (odd left, even right)"),
    )
    message: str = ""
    urls: SheetUrls = SHEET_URLS


# --------------------------------------------------------------------------- helpers


def _uploads(request: Request) -> UploadStore:
    return getattr(request.app.state, "sheet_uploads", None) or DEFAULT_UPLOADS


def _index(
    request: Request,
    templates: Any,
    snap: Snapshot,
    *,
    error: str = "",
    notice: str = "",
    target: str = "",
    status_code: int = 200,
) -> Response:
    try:
        limit_mb = max_upload_bytes() / (1024 * 1024)
    except SheetFileError as exc:
        limit_mb, error = 0.0, error or exc.describe()
    ctx = SheetsIndexContext(
        page=page(snap, "Spreadsheets", "sheets"),
        pid=snap.project_id,
        panels=tuple(p.tag for p in snap.model.panels),
        max_upload_mb=limit_mb,
        target=target,
        error=error,
        notice=notice,
    )
    return templates.TemplateResponse(
        request, "sheets/index.html", {"ctx": ctx, "page": ctx.page}, status_code=status_code
    )


def _held(request: Request, pid: int, token: str) -> HeldUpload:
    held = _uploads(request).load(token, pid)
    if held is None:
        raise NotFound("this upload is no longer held (it was confirmed, discarded or expired); upload the file again")
    return held


def _text(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return str(v)


def _plan_view(k: int, plan: SheetPlan, grid: Grid, single: bool) -> PlanView:
    cmap = plan.mapping
    start = cmap.header_row + 1
    samples_rows = [r for r in grid.rows[start:] if any(v not in (None, "") for v in r)][:SAMPLE_ROWS]
    cols = []
    for i in range(max(len(cmap.roles), grid.width)):
        role = cmap.roles[i] if i < len(cmap.roles) else Role.IGNORE
        header = cmap.headers[i] if i < len(cmap.headers) else ""
        samples = tuple(_text(r[i]) if i < len(r) else "" for r in samples_rows)
        side = cmap.side_of(i)
        label = side.value if side else ""
        if (
            side is not None
            and role in SHARED_ROLES
            and cmap.side_map(Side.LEFT).roles[i] == cmap.side_map(Side.RIGHT).roles[i]
        ):
            label = "both halves"  # a phase or panel column the other half reads too
        cols.append(ColumnView(i, column_letter(i), header, role.value, samples, label))
    return PlanView(
        k,
        plan.sheet,
        plan.panel or "",
        cmap.header_row + 1,
        tuple(cols),
        single,
        layout=cmap.layout.value,
        split=column_letter(cmap.split) if cmap.split is not None else "",
    )


_FIELD_LABEL = {"breaker_amps": "trip", "va": "load", "harmonic3_pct": "3rd harmonic"}


def _other_fields(c: Circuit) -> str:
    parts = []
    if c.pf is not None:
        parts.append(f"pf {c.pf:g}")
    if c.status != Status.NEW:
        parts.append(c.status.value)
    if c.continuous is not None:
        parts.append("continuous" if c.continuous else "not continuous")
    if c.feeds:
        parts.append(f"feeds {c.feeds}")
    if c.locked:
        parts.append("locked")
    if c.harmonic3_pct:
        parts.append(f"3rd harmonic {c.harmonic3_pct:g} %")
    return "; ".join(parts)


def _row_view(row: PreviewRow) -> RowView:
    c = row.circuit
    marks: dict[str, str] = {}
    problems = []
    for p in row.problems:
        key = p.field or ""
        if marks.get(key) != "error":
            marks[key] = p.severity.value
        where = f"column {column_letter(p.column)}" if p.column is not None else "row"
        if p.field:
            where += f" ({_FIELD_LABEL.get(p.field, p.field)})"
        problems.append((p.severity.value, where, p.message))
    if c is None:
        return RowView(
            row.sheet, row.sheet_row, row.panel or "", row.ignored, row.side, marks=marks, problems=tuple(problems)
        )
    return RowView(
        sheet=row.sheet,
        sheet_row=row.sheet_row,
        panel=row.panel or "",
        ignored=row.ignored,
        side=row.side,
        slot_inferred=row.slot_inferred,
        slot=str(c.slot),
        poles=str(c.poles),
        phases="".join(row.phases),
        description=c.description,
        category=(c.category.value if c.category else "equipment (default)"),
        va="" if c.va is None else f"{c.va:,.0f}",
        breaker="" if c.breaker_amps is None else str(c.breaker_amps),
        notes=c.notes,
        other=_other_fields(c),
        marks=marks,
        problems=tuple(problems),
    )


def _import_context(
    snap: Snapshot,
    held: HeldUpload,
    book: Book,
    plans: list[SheetPlan],
    preview: ImportPreview,
    *,
    single: bool,
    message: str = "",
) -> ImportContext:
    grids = {g.name: g for g in book.sheets}
    return ImportContext(
        page=page(snap, f"Import {held.filename}", "sheets"),
        pid=snap.project_id,
        token=held.token,
        filename=held.filename,
        plans=tuple(_plan_view(k, p, grids[p.sheet], single) for k, p in enumerate(plans)),
        rows=tuple(_row_view(r) for r in preview.rows),
        problems=preview.problems,
        notes=preview.notes,
        error_count=preview.error_count,
        warning_count=preview.warning_count,
        can_commit=preview.can_commit,
        circuit_counts=tuple((tag, len(cs)) for tag, cs in preview.circuits.items()),
        expected_version=snap.data_version,
        sheet_names=tuple(g.name for g in book.sheets),
        panels=tuple(p.tag for p in snap.model.panels),
        message=message,
    )


def _render_import(
    request: Request, templates: Any, htmx: bool, ctx: ImportContext, status_code: int = 200
) -> Response:
    name = "sheets/_work.html" if htmx else "sheets/import.html"
    return templates.TemplateResponse(request, name, {"ctx": ctx, "page": ctx.page}, status_code=status_code)


def _blank_map(grid: Grid) -> ColumnMap:
    width = max(grid.width, 1)
    first = grid.rows[0] if grid.rows else ()
    headers = tuple(_text(first[i]) if i < len(first) else "" for i in range(width))
    return ColumnMap(header_row=0, roles=(Role.IGNORE,) * width, headers=headers)


def _initial_plans(book: Book, snap: Snapshot, target: str, sheet: str | None) -> tuple[list[SheetPlan], str]:
    """The first guess; a sheet with no recognisable header gets a blank mapping and a message."""
    if target and target != AUTO:
        grid = book.sheet(sheet)
        try:
            return plan_sheets(book, snap.model, panel=target, sheet=grid.name), ""
        except MappingError as exc:
            return [SheetPlan(grid.name, _blank_map(grid), target)], str(exc)
    return plan_sheets(book, snap.model, sheet=sheet), ""


def plans_from_form(book: Book, form: Mapping[str, str], trigger: str | None) -> list[SheetPlan]:
    """The mapping as the user left it: per plan, sheet, panel, header row, layout and each column's role.

    A changed sheet, header row, layout or right-half column re-guesses that plan; a column given a
    role another column of its half holds takes it over when it is the control just changed
    (``trigger``).
    """
    try:
        count = int(form.get("plan-count", "0"))
    except ValueError:
        count = 0
    plans = []
    for k in range(min(count, 100)):
        prefix = f"plan-{k}-"
        grid = book.sheet(form.get(prefix + "sheet") or None)
        panel = form.get(prefix + "panel") or None
        try:
            header_row = max(int(form.get(prefix + "header_row", "1")) - 1, 0)
        except ValueError:
            header_row = 0
        header_row = min(header_row, max(len(grid.rows) - 1, 0))
        try:
            layout = Layout(form.get(prefix + "layout", Layout.SINGLE.value))
        except ValueError:
            layout = Layout.SINGLE
        split = column_index(form.get(prefix + "split", "")) if layout == Layout.TWO_COLUMN else None
        if split is not None and not 1 <= split < max(grid.width, 2):
            split = None
        changed = (
            form.get(prefix + "sheet") != form.get(prefix + "sheet-was")
            or str(header_row + 1) != form.get(prefix + "header_row-was")
            or layout.value != form.get(prefix + "layout-was", Layout.SINGLE.value)
            or (layout == Layout.TWO_COLUMN and form.get(prefix + "split", "") != form.get(prefix + "split-was", ""))
        )
        if not grid.rows:
            guessed = _blank_map(grid)
        elif changed and form.get(prefix + "sheet") != form.get(prefix + "sheet-was"):
            guessed = mapping_at(grid, header_row)  # another sheet: its layout is detected afresh
        else:
            guessed = mapping_at(grid, header_row, layout, split)
        if changed:
            plans.append(SheetPlan(grid.name, guessed, panel))
            continue
        roles: list[Role] = []
        for i in range(len(guessed.roles)):
            try:
                roles.append(Role(form.get(f"{prefix}col-{i}", "ignore")))
            except ValueError:
                roles.append(Role.IGNORE)
        cmap = ColumnMap(header_row=header_row, roles=tuple(roles), headers=guessed.headers, split=guessed.split)
        m = re.fullmatch(rf"{re.escape(prefix)}col-(\d+)", trigger or "")
        if m and int(m.group(1)) < len(roles):
            cmap = cmap.with_role(int(m.group(1)), roles[int(m.group(1))])
        # any duplicate left (no trigger): the first column of the half keeps the role
        plans.append(SheetPlan(grid.name, cmap.deduplicated(), panel))
    return plans


def _load_book(held: HeldUpload) -> Book:
    return read_upload(held.data, held.filename, limit_bytes=max(max_upload_bytes(), len(held.data)))


# --------------------------------------------------------------------------- routes


@router.get(BASE, name="sheets")
def sheets_index(
    request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep, discarded: bool = False
) -> Response:
    notice = "The import was discarded; nothing was written." if discarded else ""
    return _index(request, templates, svc.snapshot(pid), notice=notice)


@router.post(BASE + "/upload", name="sheets_upload")
async def sheets_upload(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    snap = await run_in_threadpool(svc.snapshot, pid)
    try:
        limit = max_upload_bytes()
    except SheetFileError as exc:
        return _index(request, templates, snap, error=exc.describe(), status_code=500)
    declared = request.headers.get("content-length", "")
    if declared.isdigit() and int(declared) > limit + 256 * 1024:  # the form's own bytes are small
        return _index(
            request,
            templates,
            snap,
            error=f"The upload is {int(declared) / 1048576:.1f} MB; uploads are limited to {limit / 1048576:.1f} MB "
            "(setting PANELWRIGHT_MAX_UPLOAD_MB). Nothing was read.",
            status_code=413,
        )
    form = await request.form(max_files=1, max_fields=20)
    target = str(form.get("target") or "")
    upload = form.get("file")
    if not isinstance(upload, UploadFile) or not upload.filename:
        return _index(
            request, templates, snap, error="Choose an .xlsx or .csv file to upload.", target=target, status_code=422
        )
    data = await upload.read(limit + 1)
    filename = upload.filename
    size = max(getattr(upload, "size", None) or 0, len(data))  # the whole upload's size, not just what was read
    await upload.close()
    if target and target != AUTO and snap.model.panel(target) is None:
        return _index(request, templates, snap, error=f"Panel {target!r} is not in this project.", status_code=422)
    try:
        check_size(size, source=PurePath(filename).name, limit_bytes=limit)
        book = await run_in_threadpool(read_upload, data, filename, limit_bytes=limit)
        await run_in_threadpool(_initial_plans, book, snap, target, None)
    except (SheetFileError, MappingError) as exc:
        return _index(request, templates, snap, error=str(exc), target=target, status_code=422)
    token = _uploads(request).save(pid, filename, data)
    return RedirectResponse(SHEET_URLS.work(pid, token, target=target or AUTO), status_code=303)


@router.get(WORK, name="sheets_work")
def sheets_work(
    request: Request,
    pid: int,
    token: str,
    svc: ServicesDep,
    templates: TemplatesDep,
    htmx: HtmxDep,
    target: str = AUTO,
    sheet: str | None = None,
) -> Response:
    snap = svc.snapshot(pid)
    held = _held(request, pid, token)
    try:
        book = _load_book(held)
        plans, message = _initial_plans(book, snap, target, sheet)
    except (SheetFileError, MappingError) as exc:
        return _index(request, templates, snap, error=str(exc), status_code=422)
    preview = preview_upload(book, plans, snap.model)
    ctx = _import_context(snap, held, book, plans, preview, single=target != AUTO, message=message)
    return _render_import(request, templates, htmx, ctx)


async def _form(request: Request) -> dict[str, str]:
    form = await request.form(max_files=0, max_fields=2000)
    return {k: v for k, v in form.items() if isinstance(v, str)}


def _preview_from_form(
    request: Request, svc: Services, pid: int, token: str, form: Mapping[str, str]
) -> tuple[Snapshot, HeldUpload, Book, list[SheetPlan], ImportPreview, bool]:
    snap = svc.snapshot(pid)
    held = _held(request, pid, token)
    book = _load_book(held)
    plans = plans_from_form(book, form, request.headers.get("HX-Trigger-Name"))
    preview = preview_upload(book, plans, snap.model)
    return snap, held, book, plans, preview, form.get("single") == "1"


@router.post(WORK + "/preview", name="sheets_preview")
async def sheets_preview(
    request: Request, pid: int, token: str, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep
) -> Response:
    form = await _form(request)
    try:
        snap, held, book, plans, preview, single = await run_in_threadpool(
            _preview_from_form, request, svc, pid, token, form
        )
    except (SheetFileError, MappingError) as exc:
        snap = await run_in_threadpool(svc.snapshot, pid)
        return _index(request, templates, snap, error=str(exc), status_code=422)
    ctx = _import_context(snap, held, book, plans, preview, single=single)
    return _render_import(request, templates, htmx, ctx)


@router.post(WORK + "/commit", name="sheets_commit")
async def sheets_commit(
    request: Request, pid: int, token: str, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep
) -> Response:
    form = await _form(request)
    try:
        snap, held, book, plans, preview, single = await run_in_threadpool(
            _preview_from_form, request, svc, pid, token, form
        )
    except (SheetFileError, MappingError) as exc:
        snap = await run_in_threadpool(svc.snapshot, pid)
        return _index(request, templates, snap, error=str(exc), status_code=422)

    def again(message: str, status: int) -> Response:
        ctx = _import_context(snap, held, book, plans, preview, single=single, message=message)
        return _render_import(request, templates, htmx, ctx, status_code=status)

    if form.get("expected_version") != str(snap.data_version):
        return again(
            "The project changed after this preview was made; nothing was written. "
            "The preview below is fresh: check it and confirm again.",
            409,
        )
    if not preview.can_commit:
        return again(
            f"Not written: {preview.error_count} errors are marked below. Correct the mapping or the file.", 422
        )
    circuits = preview.circuits_by_panel()
    try:
        await run_in_threadpool(replace_panel_circuits, svc, pid, circuits, expected_version=snap.data_version)
    except (Conflict, NotFound) as exc:
        return again(f"Not written: {exc}", 409)
    _uploads(request).discard(token)
    tags = list(circuits)
    target = SHEET_URLS.panel(pid, tags[0]) if len(tags) == 1 else f"/projects/{pid}/tree"
    if htmx:
        return Response(status_code=204, headers={"HX-Redirect": target})
    return RedirectResponse(target, status_code=303)


@router.post(WORK + "/discard", name="sheets_discard")
def sheets_discard(request: Request, pid: int, token: str, svc: ServicesDep) -> Response:
    svc.snapshot(pid)  # 404 for an unknown project
    _uploads(request).discard(token)
    return RedirectResponse(SHEET_URLS.index(pid) + "?discarded=true", status_code=303)


def _download(body: bytes, filename: str, media_type: str) -> Response:
    return Response(body, media_type=media_type, headers={"Content-Disposition": f'attachment; filename="{filename}"'})


def _stem(snap: Snapshot) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "-", snap.info.number or f"project-{snap.project_id}").strip("-") or "project"


XLSX_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"


@router.get(BASE + "/export.xlsx", name="sheets_export_xlsx")
def export_xlsx(pid: int, svc: ServicesDep, layout: str = Layout.SINGLE.value) -> Response:
    snap = svc.snapshot(pid)
    try:
        chosen = Layout(layout)
    except ValueError:
        choices = ", ".join(v.value for v in Layout)
        return Response(
            f"layout {layout!r} is not known; use one of {choices}", status_code=422, media_type="text/plain"
        )
    suffix = "-two-column" if chosen == Layout.TWO_COLUMN else ""
    return _download(
        project_xlsx(snap.model, snap.result, layout=chosen), f"{_stem(snap)}-schedules{suffix}.xlsx", XLSX_TYPE
    )


@router.get(BASE + "/circuits.csv", name="sheets_export_circuits")
def export_circuits_csv(pid: int, svc: ServicesDep) -> Response:
    snap = svc.snapshot(pid)
    return _download(circuits_csv(snap.model), f"{_stem(snap)}-circuits.csv", "text/csv; charset=utf-8")


@router.get(BASE + "/summary.csv", name="sheets_export_summary")
def export_summary_csv(pid: int, svc: ServicesDep) -> Response:
    snap = svc.snapshot(pid)
    return _download(summary_csv(snap.model, snap.result), f"{_stem(snap)}-summary.csv", "text/csv; charset=utf-8")
