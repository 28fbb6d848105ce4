"""Writing a project out: circuit tables and the summary as XLSX or CSV, and the project file.

* XLSX: a "Summary" sheet (transformers and panels, values from the engine's
  :class:`~server.calc.results.ProjectResult`, with the caution) and one sheet per panel
  holding its circuit table.  Header row bold and frozen, units in the headers.  The panel
  sheets are one circuit per row, or with ``layout="two-column"`` the way a panelboard reads:
  odd slots in the left half of each row, even slots in the right half (mirrored), the row's
  phase between them, and "—" on the further rows of a multi-pole breaker.
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

from server import formatting as fmt
from server.calc.model import Circuit, Panel, Project
from server.calc.results import ProjectResult
from server.calc.systems import SYSTEMS, breaker_phases, breaker_slots, slot_phase

from .mapping import Layout
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

#: One half of a two-column panel sheet, from the outer edge inward; the right half is mirrored
#: and the row's phase sits between them.  Every circuit field is there, so the sheet imports back.
HALF_HEADERS: tuple[str, ...] = (
    "Ckt",
    "Description",
    "Category",
    "Load (VA)",
    "PF",
    "Status",
    "Continuous",
    "Feeds",
    "Locked",
    "3rd harmonic (%)",
    "Notes",
    "Poles",
    "Trip (A)",
)
TWO_COLUMN_HEADERS: tuple[str, ...] = (*HALF_HEADERS, "Phase", *reversed(HALF_HEADERS))

#: What the further rows of a multi-pole breaker show in its description cell.
CONTINUATION_MARK = "\u2014"

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
    "Feeder landing",  # empty when landed as labelled (feeder_rotation 0)
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


def _half(c: Circuit) -> list[Any]:
    return [
        c.slot,
        c.description,
        c.category.value if c.category else "",
        c.va if c.va is not None else "",
        c.pf if c.pf is not None else "",
        c.status.value,
        _yes_no(c.continuous),
        c.feeds or "",
        _yes_no(c.locked),
        c.harmonic3_pct,
        c.notes,
        c.poles,
        c.breaker_amps if c.breaker_amps is not None else "",
    ]


def two_column_rows(panel: Panel) -> list[list[Any]]:
    """The panel as it reads: row n holds slot 2n-1 on the left and 2n on the right, phase between.

    A multi-pole breaker fills its first slot's half; its further slots show the slot number and
    a "—" (the importer reads them back as the same breaker).  An unused slot shows its number only.
    """
    spec = SYSTEMS.get(panel.system)
    owner: dict[int, Circuit] = {}
    last = panel.spaces
    for c in panel.circuits:
        span = breaker_slots(c.slot, c.poles) if not c.is_space else (c.slot,)
        for s in span:
            owner[s] = c
        last = max(last, span[-1])
    width = len(HALF_HEADERS)
    rows = []
    for n in range(1, (last + 1) // 2 + 1):
        halves = []
        for slot in (2 * n - 1, 2 * n):
            c = owner.get(slot)
            if c is None:
                half: list[Any] = [slot] + [""] * (width - 1)
            elif c.slot == slot:
                half = _half(c)
            else:
                half = [slot, CONTINUATION_MARK] + [""] * (width - 2)
            halves.append(half)
        phase = slot_phase(spec, 2 * n - 1) if spec is not None else ""
        rows.append([*halves[0], phase, *reversed(halves[1])])
    return rows


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
                fmt.landing(p.feeder_rotation),
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


def project_xlsx(project: Project, result: ProjectResult, layout: Layout = Layout.SINGLE) -> bytes:
    """The workbook: Summary sheet, then one circuit sheet per panel (header frozen).

    ``layout``: one circuit per row, or two (odd left, even right) as the panelboard reads.
    """
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
        if layout == Layout.TWO_COLUMN:
            title = f"Panel {panel.tag}   {panel.system}   {panel.bus_amps} A bus   "
            title += f"{panel.main_amps} A main" if panel.main_amps is not None else "main lugs only"
            sheet["A1"] = title
            sheet["A1"].font = Font(bold=True, size=12)
            _write_table(sheet, TWO_COLUMN_HEADERS, two_column_rows(panel), start_row=3)
            sheet.freeze_panes = "A4"
        else:
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
