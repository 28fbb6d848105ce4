"""Writing a project out: circuit tables and the summary as XLSX or CSV, and the project file.

* XLSX: a "Summary" sheet (transformers and panels, values from the engine's
  :class:`~server.calc.results.ProjectResult`, with the caution) and one sheet per panel
  holding its circuit table.  Header row bold and frozen, units in the headers.
* CSV: one table of every panel's circuits with a Panel column (the importer reads it back
  with that column mapped to ``panel``), and the summary as a second CSV.
* The project file: :func:`server.calc.projectfile.dumps_project` (version-1 JSON).

Circuit columns carry every field of :class:`~server.calc.model.Circuit`, so a panel written
here and imported again gives the same circuits (tests check the round trip).  Text that a
spreadsheet program would run as a formula is always written as text.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Sequence
from typing import Any

from server.calc.model import Circuit, Panel, Project
from server.calc.results import ProjectResult
from server.calc.systems import SYSTEMS, breaker_phases

from .reader import escape_text

CAUTION = (
    "Results support, and never replace, the engineer of record's judgement. "
    "The adopted code edition and local amendments govern."
)

#: Circuit table headers, units in brackets.  The importer's header guess maps each back.
CIRCUIT_HEADERS: tuple[str, ...] = (
    "Slot",
    "Poles",
    "Description",
    "Category",
    "Load (VA)",
    "PF",
    "Breaker (A)",
    "Phase",
    "Status",
    "Continuous",
    "Feeds",
    "Locked",
    "3rd harmonic (%)",
    "Notes",
)

PANEL_SUMMARY_HEADERS: tuple[str, ...] = (
    "Panel",
    "System",
    "Fed from",
    "Bus (A)",
    "Main (A)",
    "Connected (kVA)",
    "Demand (kVA)",
    "Design current (A)",
    "Capacity used (%)",
    "Phase imbalance (%)",
    "Spaces used",
    "Spaces",
    "Feeder",
    "Warnings",
)

TRANSFORMER_SUMMARY_HEADERS: tuple[str, ...] = (
    "Transformer",
    "Rating (kVA)",
    "Primary",
    "Secondary",
    "Fed from",
    "Load (kVA)",
    "Loading (%)",
    "Suggested (kVA)",
    "Secondary FLA (A)",
    "Primary OCPD (A)",
    "Primary feeder",
    "Warnings",
)


def _yes_no(value: bool | None) -> str:
    if value is None:
        return ""
    return "yes" if value else "no"


def circuit_row(panel: Panel, c: Circuit) -> list[Any]:
    spec = SYSTEMS.get(panel.system)
    phases = ""
    if spec is not None and not c.is_space and c.poles <= len(spec.phases):
        phases = "".join(breaker_phases(spec, c.slot, c.poles))
    return [
        c.slot,
        c.poles,
        c.description,
        c.category.value if c.category else "",
        c.va if c.va is not None else "",
        c.pf if c.pf is not None else "",
        c.breaker_amps if c.breaker_amps is not None else "",
        phases,
        c.status.value,
        _yes_no(c.continuous),
        c.feeds or "",
        _yes_no(c.locked),
        c.harmonic3_pct,
        c.notes,
    ]


def _r(value: float | None, digits: int = 2) -> float | str:
    return "" if value is None else round(value, digits)


def panel_summary_rows(project: Project, result: ProjectResult) -> list[list[Any]]:
    rows = []
    for p in project.panels:
        pr = result.panels.get(p.tag)
        if pr is None:
            continue
        rows.append(
            [
                p.tag,
                p.system,
                p.fed_from or "",
                p.bus_amps,
                p.main_amps if p.main_amps is not None else "MLO",
                _r(pr.connected_va_total / 1000.0),
                _r(pr.demand_va / 1000.0),
                _r(pr.design_amps, 1),
                _r(pr.capacity_pct, 1),
                _r(pr.imbalance_pct, 1),
                pr.spaces_used,
                pr.spaces_total,
                pr.feeder.describe() if pr.feeder else "",
                len(pr.warnings),
            ]
        )
    return rows


def transformer_summary_rows(project: Project, result: ProjectResult) -> list[list[Any]]:
    rows = []
    for t in project.transformers:
        tr = result.transformers.get(t.tag)
        if tr is None:
            continue
        rows.append(
            [
                t.tag,
                t.kva,
                t.primary,
                t.secondary,
                t.fed_from or "",
                _r(tr.load_kva),
                _r(tr.loading_pct, 1),
                _r(tr.suggested_kva),
                _r(tr.fla_secondary, 1),
                tr.primary_ocpd_amps,
                tr.feeder.describe() if tr.feeder else "",
                len(tr.warnings),
            ]
        )
    return rows


def _sheet_title(tag: str, used: set[str]) -> str:
    base = re.sub(r"[\[\]:*?/\\]", "-", tag)[:31] or "Panel"
    title, n = base, 2
    while title.lower() in used:
        suffix = f" ({n})"
        title = base[: 31 - len(suffix)] + suffix
        n += 1
    used.add(title.lower())
    return title


def _write_table(ws: Any, headers: Sequence[str], rows: Sequence[Sequence[Any]], start_row: int = 1) -> None:
    from openpyxl.styles import Font

    bold = Font(bold=True)
    for c, h in enumerate(headers, start=1):
        cell = ws.cell(row=start_row, column=c, value=h)
        cell.font = bold
    for r, values in enumerate(rows, start=start_row + 1):
        for c, v in enumerate(values, start=1):
            cell = ws.cell(row=r, column=c, value=v)
            if isinstance(v, str) and v.startswith("="):
                cell.data_type = "s"  # text that looks like a formula stays text
    for c, h in enumerate(headers, start=1):
        longest = max([len(h)] + [len(str(row[c - 1])) for row in rows[:500]])
        ws.column_dimensions[ws.cell(row=start_row, column=c).column_letter].width = min(max(longest + 2, 6), 60)


def project_xlsx(project: Project, result: ProjectResult) -> bytes:
    """The workbook: Summary sheet, then one circuit sheet per panel (header frozen)."""
    from openpyxl import Workbook
    from openpyxl.styles import Font

    wb = Workbook()
    ws = wb.active
    ws.title = "Summary"
    used = {"summary"}
    info = project.project
    ws["A1"] = f"{info.number} {info.name}".strip()
    ws["A1"].font = Font(bold=True, size=13)
    ws["A2"] = f"Code: {result.code}; future loads {'included' if result.include_future else 'excluded'}"
    ws["A3"] = CAUTION
    row = 5
    ws.cell(row=row, column=1, value="Transformers").font = Font(bold=True, size=12)
    t_rows = transformer_summary_rows(project, result)
    _write_table(ws, TRANSFORMER_SUMMARY_HEADERS, t_rows, start_row=row + 1)
    row = row + 3 + len(t_rows)
    ws.cell(row=row, column=1, value="Panels").font = Font(bold=True, size=12)
    p_rows = panel_summary_rows(project, result)
    _write_table(ws, PANEL_SUMMARY_HEADERS, p_rows, start_row=row + 1)
    for panel in project.panels:
        sheet = wb.create_sheet(_sheet_title(panel.tag, used))
        _write_table(sheet, CIRCUIT_HEADERS, [circuit_row(panel, c) for c in panel.circuits])
        sheet.freeze_panes = "A2"
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _csv(headers: Sequence[str], rows: Sequence[Sequence[Any]]) -> bytes:
    buf = io.StringIO(newline="")
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(headers)
    for row in rows:
        w.writerow([escape_text(v) if isinstance(v, str) else v for v in row])
    # UTF-8 with a byte-order mark: spreadsheet programs then read non-ASCII text correctly
    return ("\ufeff" + buf.getvalue()).encode("utf-8")


def circuits_csv(project: Project, panels: Sequence[str] | None = None) -> bytes:
    """Every circuit of the project (or of ``panels``) in one table, with a Panel column first."""
    rows = []
    for p in project.panels:
        if panels is not None and p.tag not in panels:
            continue
        rows.extend([p.tag, *circuit_row(p, c)] for c in p.circuits)
    return _csv(("Panel", *CIRCUIT_HEADERS), rows)


def summary_csv(project: Project, result: ProjectResult) -> bytes:
    """Panels then transformers, each its own header row, with the caution as the last line."""
    buf = io.StringIO(newline="")
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(PANEL_SUMMARY_HEADERS)
    for row in panel_summary_rows(project, result):
        w.writerow([escape_text(v) if isinstance(v, str) else v for v in row])
    w.writerow([])
    w.writerow(TRANSFORMER_SUMMARY_HEADERS)
    for row in transformer_summary_rows(project, result):
        w.writerow([escape_text(v) if isinstance(v, str) else v for v in row])
    w.writerow([])
    w.writerow([CAUTION])
    return ("\ufeff" + buf.getvalue()).encode("utf-8")
