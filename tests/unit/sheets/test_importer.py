"""Import of circuit tables: the messy schedule, notations, unit conversion and engine rules."""

from __future__ import annotations

import math

import pytest

from server.calc.model import Category, Circuit
from server.sheets import plan_sheets, preview_upload, read_upload
from server.sheets.importer import Severity, parse_breaker, parse_slot
from tests.helpers import assert_close

from .conftest import small_project


def _preview(data: bytes, name: str, project, **kw):
    book = read_upload(data, name)
    return preview_upload(book, plan_sheets(book, project, **kw), project)


def test_messy_schedule_imports_to_the_expected_circuits(messy_bytes, project):
    pv = _preview(messy_bytes, "messy.xlsx", project, panel="LP-1")
    got = {c.slot: c for c in pv.circuits["LP-1"]}
    expected = {
        1: Circuit(1, 1, "Lighting - Office 101", Category.LIGHTING, 1200.0, breaker_amps=20, notes="LED troffers"),
        3: Circuit(3, 1, "Receptacles - Office 101", Category.RECEPTACLE, 900.0, breaker_amps=20),
        5: Circuit(5, 3, "RTU-1", Category.COOLING, 9600.0, breaker_amps=40, notes="Roof"),
        2: Circuit(2, 1, "Copier", Category.EQUIPMENT, 1500.0, breaker_amps=20),
        4: Circuit(4, 2, "Water heater", Category.HEATING, 4500.0, breaker_amps=30),
        8: Circuit(8, 2, "EV charger, bay 1", Category.EV_CHARGING, 7200.0, breaker_amps=40, notes="Bay 1"),
        11: Circuit(11, 1, "Mystery load", Category.EQUIPMENT, 500.0, breaker_amps=20),
    }
    assert got == expected
    # the totals row (holding a formula) and the line below it are ignored, not errors
    ignored = {r.sheet_row: r.ignored for r in pv.rows if r.ignored}
    assert ignored == {15: "totals row (not a circuit)", 16: "below the totals row"}
    assert pv.error_count == 0 and pv.can_commit
    # two warnings, both on row 12: unknown category, phase column disagreeing with the slot
    row12 = next(r for r in pv.rows if r.sheet_row == 12)
    assert {(p.field, p.severity) for p in row12.problems} == {
        ("category", Severity.WARNING),
        ("phase", Severity.WARNING),
    }
    assert row12.problems_at(5)[0].message.startswith("the phase column says A, but slot 11")


def test_messy_schedule_mapping_reads_the_merged_two_row_header(messy_bytes, project):
    book = read_upload(messy_bytes, "messy.xlsx")
    cmap = plan_sheets(book, project, panel="LP-1")[0].mapping
    assert cmap.header_row == 3  # sheet row 4 (0-based 3): the band is rows 3-4
    assert [r.value for r in cmap.roles] == [
        "slot",
        "description",
        "breaker",
        "poles",
        "kva",
        "phase",
        "category",
        "notes",
    ]


def _csv(text: str) -> bytes:
    return text.encode("utf-8")


def test_amps_column_converted_with_panel_voltage():
    # common practice: 1-pole VA = I x V_LN, 2-pole VA = I x V_LL, 3-pole VA = sqrt(3) x V_LL x I
    # (nominal 208Y/120 per ANSI C84.1)
    project = small_project()
    data = _csv("Ckt,Description,Poles,Load Amps\n1,A,1,10\n2,B,2,10\n3,C,3,10\n")
    pv = _preview(data, "amps.csv", project, panel="LP-1")
    va = {c.slot: c.va for c in pv.circuits["LP-1"]}
    assert_close(va[1], 1200.0, what="1-pole 10 A at 120 V")
    assert_close(va[2], 2080.0, what="2-pole 10 A at 208 V")
    assert_close(va[3], math.sqrt(3) * 208 * 10, what="3-pole 10 A at 208 V")
    assert_close(va[3], 3602.7, rel=1e-4, what="sqrt(3) x 208 x 10 from memory")


def test_amps_on_a_delta_without_neutral_is_a_cell_error():
    project = small_project(system="480 3PH 3W")
    pv = _preview(_csv("Ckt,Description,Poles,Load Amps\n1,Heater,1,10\n"), "d.csv", project, panel="LP-1")
    assert not pv.can_commit
    messages = [p.message for r in pv.rows for p in r.problems]
    assert any("no neutral" in m for m in messages)


def test_overlap_and_two_pole_on_two_wire_are_errors_from_the_engine_rules():
    project = small_project()
    data = _csv("Ckt,Description,Poles,VA\n1,Big,3,3000\n3,Clash,1,500\n")
    pv = _preview(data, "o.csv", project, panel="LP-1")
    assert pv.error_count == 1
    clash = next(r for r in pv.rows if r.circuit and r.circuit.slot == 3)
    (problem,) = clash.problems
    assert "overlap" in problem.message and problem.column == 0 and problem.field == "slot"

    two_wire = small_project(system="120 1PH 2W")
    pv = _preview(_csv("Ckt,Description,Poles,VA\n1,Dryer,2,5000\n"), "t.csv", two_wire, panel="LP-1")
    (problem,) = [p for r in pv.rows for p in r.problems]
    assert problem.field == "poles" and problem.column == 2 and "2-pole" in problem.message


def test_kva_vs_va_guessed_from_an_unlabelled_load_column():
    project = small_project()
    pv = _preview(_csv("Ckt,Description,Load\n1,A,1.5\n2,B,0.8\n3,C,2.25\n"), "k.csv", project, panel="LP-1")
    assert [c.va for c in pv.circuits["LP-1"]] == [1500.0, 800.0, 2250.0]
    pv = _preview(_csv("Ckt,Description,Load\n1,A,1500\n2,B,800\n"), "v.csv", project, panel="LP-1")
    assert [c.va for c in pv.circuits["LP-1"]] == [1500.0, 800.0]


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("7", (7, None)),
        (7.0, (7, None)),
        ("1,3,5", (1, 3)),
        ("1-3-5", (1, 3)),
        ("2/4", (2, 2)),
        ("1-5", (1, 3)),
    ],
)
def test_slot_notations(text, expected):
    assert parse_slot(text) == expected


@pytest.mark.parametrize("text", ["1,4", "A1", "7.5", "1,3,5,7"])
def test_bad_slot_notations_say_what_is_wrong(text):
    got = parse_slot(text)
    assert isinstance(got, str) and repr(str(text)) in got or str(text) in got


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        (20, (20, None)),
        ("20A", (20, None)),
        ("20/1", (20, 1)),
        ("30A/2P", (30, 2)),
        ("2P-30A", (30, 2)),
        ("1/20", (20, 1)),
    ],
)
def test_breaker_notations(text, expected):
    assert parse_breaker(text) == expected


def test_breaker_poles_disagreeing_with_poles_column_is_an_error():
    pv = _preview(_csv("Ckt,Description,Trip,Poles,VA\n1,X,20/2,1,100\n"), "b.csv", small_project(), panel="LP-1")
    (problem,) = [p for r in pv.rows for p in r.problems]
    assert problem.column == 2 and "says 2 poles" in problem.message and not pv.can_commit


def test_formula_cells_are_problems_never_values(project):
    import io

    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.append(["Ckt", "Description", "VA"])
    ws.append([1, "Heater", "=1000*2"])
    ws.append([2, "Lamp", 100])
    buf = io.BytesIO()
    wb.save(buf)
    pv = _preview(buf.getvalue(), "f.xlsx", project, panel="LP-1")
    row = next(r for r in pv.rows if r.sheet_row == 2)
    (problem,) = row.problems
    assert problem.column == 2 and "formula" in problem.message and "=1000*2" in problem.message
    assert row.circuit is not None and row.circuit.va is None  # never evaluated to 2000
    assert not pv.can_commit


def test_rows_without_slot_and_unknown_panel_rows_are_errors():
    project = small_project(tags=("LP-1", "LP-2"))
    data = _csv("Panel,Ckt,Description,VA\nLP-1,1,A,100\nLP-9,1,B,100\nLP-2,,C,100\nLP-2,2,D,100\n")
    pv = _preview(data, "p.csv", project)
    assert {t: [c.slot for c in cs] for t, cs in pv.circuits.items()} == {"LP-1": [1], "LP-2": [2]}
    msgs = sorted(p.message for r in pv.rows for p in r.problems)
    assert msgs == ["no slot number; every circuit needs one", "panel 'LP-9' is not in this project"]


def test_space_and_spare_words():
    pv = _preview(_csv("Ckt,Description,Trip\n1,SPACE,\n3,Spare,20\n"), "s.csv", small_project(), panel="LP-1")
    c1, c3 = pv.circuits["LP-1"]
    assert c1.is_space and c3.category == Category.SPARE and c3.breaker_amps == 20


def test_html_in_descriptions_is_kept_as_plain_text(project):
    pv = _preview(_csv('Ckt,Description,VA\n1,"<script>alert(1)</script>",100\n'), "x.csv", project, panel="LP-1")
    assert pv.circuits["LP-1"][0].description == "<script>alert(1)</script>"


def test_units_typed_in_cells_win_over_the_column():
    # common practice: 1-pole VA = I x V_LN (120 V on 208Y/120)
    data = _csv('Ckt,Description,Load (VA)\n1,A,"1,500"\n2,B,1.2 kVA\n3,C,10 A\n4,D,800 VA\n')
    pv = _preview(data, "u.csv", small_project(), panel="LP-1")
    assert [c.va for c in pv.circuits["LP-1"]] == [1500.0, 1200.0, 1200.0, 800.0]


def test_cover_sheet_is_skipped_when_no_sheet_is_named(project):
    import io

    from openpyxl import Workbook

    wb = Workbook()
    wb.active.title = "Cover"
    wb.active["A1"] = "Project schedules"
    ws = wb.create_sheet("Data")
    ws.append(["Ckt", "Description", "VA"])
    ws.append([1, "A", 100])
    buf = io.BytesIO()
    wb.save(buf)
    book = read_upload(buf.getvalue(), "c.xlsx")
    (plan,) = plan_sheets(book, project, panel="LP-1")
    assert plan.sheet == "Data"
