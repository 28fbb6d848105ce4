"""Export: XLSX layout, round trips through the importer, CSV escaping."""

from __future__ import annotations

import csv
import io
from dataclasses import replace

import openpyxl
import pytest

from server.calc.engine import compute_project
from server.calc.model import Category, Circuit, Status
from server.calc.projectfile import load_project_file, replace_panel
from server.sheets import plan_sheets, preview_upload, read_upload
from server.sheets.export import (
    CAUTION,
    CIRCUIT_HEADERS,
    TWO_COLUMN_HEADERS,
    circuits_csv,
    project_xlsx,
    summary_csv,
)
from server.sheets.mapping import Layout
from tests.helpers import DEMO_FILE


def _demo():
    return load_project_file(DEMO_FILE)


def _leaf_panel(project):
    """A panel that feeds nothing (so its circuits can be replaced freely), with a neutral."""
    return next(p for p in project.panels if not any(c.feeds for c in p.circuits) and "Y/" in p.system)


def _exports(project):
    """The same project as a one-circuit-per-row XLSX, a two-column XLSX and a CSV."""
    result = compute_project(project)
    return (
        (project_xlsx(project, result), "p.xlsx"),
        (project_xlsx(project, result, layout=Layout.TWO_COLUMN), "two-column.xlsx"),
        (circuits_csv(project), "p.csv"),
    )


@pytest.mark.parametrize("layout", list(Layout))
def test_xlsx_round_trip_gives_the_same_circuits(layout):
    project = _demo()
    data = project_xlsx(project, compute_project(project), layout=layout)
    book = read_upload(data, "demo.xlsx")
    preview = preview_upload(book, plan_sheets(book, project), project)
    assert preview.can_commit, preview.problem_lines()
    assert preview.warning_count == 0, preview.problem_lines()
    assert {p.mapping.layout for p in preview.plans} == {layout}
    assert set(preview.circuits) == {p.tag for p in project.panels}
    for panel in project.panels:
        assert preview.circuits[panel.tag] == panel.circuits, panel.tag


def test_two_column_sheet_reads_like_the_panelboard():
    # slots odd left / even right, row n holds 2n-1 and 2n; three-phase rows run A, B, C (common practice)
    project = _demo()
    lp = _leaf_panel(project)
    cs = (
        Circuit(1, 1, "Lights", Category.LIGHTING, 900.0, breaker_amps=20),
        Circuit(4, 3, "Chiller", Category.COOLING, 9000.0, breaker_amps=40),
        Circuit(5, 2, "Oven", Category.KITCHEN, 5000.0, breaker_amps=30),
        Circuit(9, 0, "Space"),
    )
    project = replace_panel(project, replace(lp, circuits=cs, spaces=12))
    wb = openpyxl.load_workbook(io.BytesIO(project_xlsx(project, compute_project(project), layout=Layout.TWO_COLUMN)))
    ws = wb[lp.tag]
    assert ws.freeze_panes == "A4" and ws["A1"].value.startswith(f"Panel {lp.tag}")
    assert tuple(c.value for c in ws[3]) == TWO_COLUMN_HEADERS
    n = len(TWO_COLUMN_HEADERS)
    rows = [tuple(c.value for c in row) for row in ws.iter_rows(min_row=4)]
    assert len(rows) == 6  # 12 spaces
    left = [(r[0], r[1], r[11]) for r in rows]
    right = [(r[n - 1], r[n - 2], r[n - 12]) for r in rows]
    phase = [r[13] for r in rows]
    assert phase == ["A", "B", "C", "A", "B", "C"]
    assert left[:6] == [
        (1, "Lights", 1),
        (3, None, None),
        (5, "Oven", 2),
        (7, "\u2014", None),
        (9, "Space", 0),
        (11, None, None),
    ]
    assert right[:4] == [(2, None, None), (4, "Chiller", 3), (6, "\u2014", None), (8, "\u2014", None)]


def test_round_trip_keeps_awkward_text_and_every_field():
    project = _demo()
    lp = _leaf_panel(project)
    odd = (
        Circuit(
            1,
            1,
            "=cmd|' /C calc'!A0",
            Category.RECEPTACLE,
            180.0,
            0.95,
            True,
            20,
            Status.EXISTING,
            15.0,
            notes="<script>alert(1)</script>",
        ),
        Circuit(3, 0, "", notes="'quoted"),
        Circuit(5, 1, "-5 dB fan", Category.MOTOR, 333.3, None, False, 15, Status.FUTURE, locked=True),
    )
    lp = replace(lp, circuits=odd)
    project = replace_panel(project, lp)
    for data, name in _exports(project):
        book = read_upload(data, name)
        preview = preview_upload(book, plan_sheets(book, project), project)
        got = preview.circuits[lp.tag]
        assert got == lp.circuits, name


def test_xlsx_layout_header_frozen_units_and_summary_from_results():
    project = _demo()
    result = compute_project(project)
    wb = openpyxl.load_workbook(io.BytesIO(project_xlsx(project, result)))
    assert wb.sheetnames == ["Summary", *[p.tag for p in project.panels]]
    first = wb[project.panels[0].tag]
    assert first.freeze_panes == "A2"
    assert tuple(c.value for c in first[1]) == CIRCUIT_HEADERS
    assert first["A1"].font.bold
    summary = wb["Summary"]
    assert summary["A3"].value == CAUTION
    # the panels table: find the row of the first panel and check a value against the engine
    values = {row[0]: row for row in summary.iter_rows(values_only=True) if row and row[0]}
    tag = project.panels[0].tag
    assert values[tag][6] == round(result.panels[tag].demand_va / 1000.0, 2)
    t = project.transformers[0].tag
    assert values[t][6] == round(result.transformers[t].loading_pct, 1)
    # text that looks like a formula was written as text
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                assert cell.data_type != "f"


def test_csv_escapes_formula_text_and_summary_has_caution():
    project = _demo()
    lp = _leaf_panel(project)
    lp = replace(lp, circuits=(Circuit(1, 1, '=HYPERLINK("x")', va=10.0),))
    project = replace_panel(project, lp)
    text = circuits_csv(project).decode("utf-8-sig")
    assert "'=HYPERLINK" in text
    summary = summary_csv(project, compute_project(project)).decode("utf-8-sig")
    assert summary.splitlines()[0].startswith("Panel,System,Fed from")
    assert CAUTION in summary


def test_special_words_round_trip_exactly():
    """Words the importer reads specially in messy sheets stay as written in an exported table."""
    project = _demo()
    lp = _leaf_panel(project)
    odd = (
        Circuit(1, 1, "Spare", None, None, breaker_amps=20),
        Circuit(3, 1, "SPACE", Category.LIGHTING, 100.0),
        Circuit(5, 1, "TOTAL", None, 10.0),
        Circuit(7, 1, "Ckt", None, 10.0, notes="Slot"),
        # continuation marks of two-column sheets, written as descriptions, stay descriptions
        Circuit(8, 1, "\u2014", None, 10.0),
        Circuit(9, 2, "/", None, 10.0),
        Circuit(10, 1, "2P", None, 10.0, notes="do"),
        Circuit(12, 1, "Description", None, 10.0, notes="Notes"),
    )
    project = replace_panel(project, replace(lp, circuits=odd))
    for data, name in _exports(project):
        book = read_upload(data, name)
        preview = preview_upload(book, plan_sheets(book, project), project)
        assert preview.circuits[lp.tag] == odd, name


def test_summary_shows_a_feeder_landing_other_than_as_labelled():
    project = _demo()
    lp = next(p for p in project.panels if p.system == "208Y/120 3PH 4W")
    project = replace_panel(project, replace(lp, feeder_rotation=2))
    rows = list(csv.reader(io.StringIO(summary_csv(project, compute_project(project)).decode("utf-8-sig"))))
    header = next(r for r in rows if r and r[0] == "Panel")
    col = header.index("Feeder landing")
    landing = {r[0]: r[col] for r in rows if r and len(r) > col and r[0] in {p.tag for p in project.panels}}
    assert landing[lp.tag] == "A→C, B→A, C→B"
    assert all(v == "" for tag, v in landing.items() if tag != lp.tag)
