"""Two-column panel schedules: odd circuits in the left half of each row, even circuits in the right half.

Every workbook is built here with openpyxl; tags, descriptions and values are invented.  The
slot → phase rule checked is the panelboard convention the engine uses (README: rows run
A, B, C on a three-phase board; a breaker of P poles at slot s takes s, s+2, s+4) — common practice.
"""

from __future__ import annotations

import io
from collections.abc import Sequence
from dataclasses import replace

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from server.calc.model import Category, Circuit
from server.calc.projectfile import check_panel
from server.sheets import plan_sheets, preview_upload, read_upload
from server.sheets.errors import MappingError
from server.sheets.importer import Severity, SheetPlan, build_preview
from server.sheets.mapping import ColumnMap, Layout, Role, detect_split, guess_mapping, parse_overrides
from server.sheets.reader import Grid

from .conftest import small_project

TWO_HEADERS = ["CKT", "DESCRIPTION", "VA", "POLES", "TRIP", "PH", "TRIP", "POLES", "VA", "DESCRIPTION", "CKT"]


def _xlsx(rows: Sequence[Sequence[object] | None], title: str = "LP-1", merges: Sequence[str] = ()) -> bytes:
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = title
    for r, row in enumerate(rows, start=1):
        for c, v in enumerate(row or (), start=1):
            if v is not None:
                ws.cell(row=r, column=c, value=v)
    for rng in merges:
        ws.merge_cells(rng)
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _preview(data: bytes, name: str = "two.xlsx", project=None, **kw):
    project = project or small_project()
    book = read_upload(data, name)
    return preview_upload(book, plan_sheets(book, project, **kw), project)


def _grid(rows):
    rows = tuple(tuple(r) for r in rows)
    return Grid("S", rows, width=max(len(r) for r in rows))


# --------------------------------------------------------------------------- detection


@pytest.mark.parametrize(
    ("headers", "split"),
    [
        # mirrored, phase column in the middle (it goes with the left block and serves both)
        (TWO_HEADERS, 6),
        # mirrored, no middle column
        (["CKT", "DESCRIPTION", "VA", "POLES", "TRIP", "TRIP", "POLES", "VA", "DESCRIPTION", "CKT"], 5),
        # the right half in the same order as the left
        (["Ckt", "Load", "kVA", "Trip", "Ckt", "Load", "kVA", "Trip"], 4),
        # no circuit columns at all: description and load repeat
        (["Description", "VA", "Breaker", "Description", "VA", "Breaker"], 3),
    ],
)
def test_two_blocks_of_repeated_headings_are_detected(headers, split):
    assert detect_split(headers) == split
    cmap = guess_mapping(_grid([headers, [1] * len(headers)]))
    assert cmap.layout == Layout.TWO_COLUMN and cmap.split == split


@pytest.mark.parametrize(
    "headers",
    [
        # the single-column export and the CSV with a Panel column
        ["Slot", "Poles", "Description", "Category", "Load (VA)", "PF", "Breaker (A)", "Phase", "Status", "Notes"],
        ["Panel", "Slot", "Poles", "Description", "Category", "Load (kVA)", "Trip", "Phase"],
        # one slot column and one description: nothing repeats
        ["CKT", "LOAD DESCRIPTION", "TRIP", "POLES", "kVA", "PH", "TYPE", "Notes"],
    ],
)
def test_single_column_tables_stay_single(headers):
    assert detect_split(headers) is None
    assert guess_mapping(_grid([headers, ["x"] * len(headers)])).layout == Layout.SINGLE


def test_each_half_gets_its_own_roles_and_the_middle_phase_column_serves_both():
    cmap = guess_mapping(_grid([TWO_HEADERS, [1, "a", 100, 1, 20, "A", 20, 1, 100, "b", 2]]))
    assert [r.value for r in cmap.roles] == [
        "slot",
        "description",
        "va",
        "poles",
        "breaker",
        "phase",
        "breaker",
        "poles",
        "va",
        "description",
        "slot",
    ]
    right = cmap.side_map(cmap.side_of(10))
    assert right.column(Role.SLOT) == 10 and right.column(Role.PHASE) == 5 and right.column(Role.DESCRIPTION) == 9


def test_an_unlabelled_column_of_phase_letters_between_the_halves_is_the_phase():
    headers = ["CKT", "DESCRIPTION", "VA", "TRIP", "", "TRIP", "VA", "DESCRIPTION", "CKT"]
    rows = [headers, [1, "a", 100, 20, "A", 20, 100, "b", 2], [3, "c", 100, 20, "B", 20, 100, "d", 4]]
    cmap = guess_mapping(_grid(rows))
    assert cmap.split is not None and cmap.roles[4] == Role.PHASE


# --------------------------------------------------------------------------- the messy schedule


def messy_two_column_xlsx() -> bytes:
    """A hand-made-looking two-column schedule: merged title, a merged two-row header band, kVA on
    both halves, a blank layout row inside the table, a 3-pole breaker on the right spanning
    three rows (marked "—", then blank), a 2-pole on the left whose second row repeats the
    description, a spare and a space, a totals row with formulas and a phase line below it."""
    rows: list[list[object] | None] = [
        ["PANEL LP-1   208Y/120 3PH 4W   225 A MLO"],
        ["Location: level 2 electrical room"],
        None,
        ["CKT", "LOAD", None, "BREAKER", None, "PH", "BREAKER", None, "LOAD", None, "CKT"],
        [None, "DESCRIPTION", "kVA", "TRIP", "POLES", None, "TRIP", "POLES", "kVA", "DESCRIPTION", None],
        [1, "Lighting - open office", 1.2, 20, 1, "A", 20, 1, 0.9, "Receptacles - open office", 2],
        [3, "Lighting - corridor", 0.6, 20, 1, "B", 40, 3, 9.6, "AHU-2", 4],
        None,
        [5, "Water heater", 4.5, 30, 2, "C", "—", "—", "—", "—", 6],
        [7, "Water heater", None, None, None, "A", None, None, None, None, 8],
        [9, "Spare", None, 20, 1, "B", None, None, None, "Space", 10],
        [11, "Copier", 1.5, 20, None, "C", 20, 1, 0.5, "Exhaust fan", 12],
        None,
        [None, "TOTAL CONNECTED kVA", "=SUM(C6:C12)", None, None, None, None, None, "=SUM(I6:I12)", None, None],
        [None, "Phase A", 5.0, None, None, None, None, None, None, None, None],
    ]
    merges = ["A1:K1", "A2:K2", "A4:A5", "B4:C4", "D4:E4", "F4:F5", "G4:H4", "I4:J4", "K4:K5"]
    return _xlsx(rows, merges=merges)


def test_messy_two_column_schedule_imports_to_the_expected_circuits():
    pv = _preview(messy_two_column_xlsx(), panel="LP-1")
    cmap = pv.plans[0].mapping
    assert cmap.layout == Layout.TWO_COLUMN and cmap.header_row == 4 and cmap.split == 6
    got = {c.slot: c for c in pv.circuits["LP-1"]}
    assert got == {
        1: Circuit(1, 1, "Lighting - open office", va=1200.0, breaker_amps=20),
        2: Circuit(2, 1, "Receptacles - open office", va=900.0, breaker_amps=20),
        3: Circuit(3, 1, "Lighting - corridor", va=600.0, breaker_amps=20),
        4: Circuit(4, 3, "AHU-2", va=9600.0, breaker_amps=40),
        5: Circuit(5, 2, "Water heater", va=4500.0, breaker_amps=30),
        9: Circuit(9, 1, "Spare", Category.SPARE, breaker_amps=20),
        10: Circuit(10, 0, "Space"),
        11: Circuit(11, 1, "Copier", va=1500.0, breaker_amps=20),
        12: Circuit(12, 1, "Exhaust fan", va=500.0, breaker_amps=20),
    }
    assert pv.error_count == 0 and pv.warning_count == 0 and pv.can_commit
    ignored = {(r.sheet_row, r.side): r.ignored for r in pv.rows if r.ignored}
    assert ignored == {
        (9, "right"): "continues the breaker at slot 4 (right half of row 7)",
        (10, "left"): "continues the breaker at slot 5 (left half of row 9)",
        (10, "right"): "continues the breaker at slot 4 (right half of row 7)",
        (14, ""): "totals row (not a circuit)",
        (15, ""): "below the totals row",
    }
    # the 3-pole on the right sits on B, C, A (slots 4, 6, 8 are rows 2, 3, 4); the phase column's
    # single letter names the row's phase and agrees (common practice)
    ahu = next(r for r in pv.rows if r.circuit is not None and r.circuit.slot == 4)
    assert ahu.side == "right" and ahu.phases == ("B", "C", "A") and not ahu.problems


def test_a_three_pole_on_the_right_marked_on_its_rows_sums_the_pole_shares():
    # no poles column: "/" and "3P" on the continuation rows make it one 3-pole breaker; each
    # row's VA is one pole's share, so the circuit carries the sum (said in a warning)
    rows = [
        ["CKT", "DESCRIPTION", "VA", "TRIP", "TRIP", "VA", "DESCRIPTION", "CKT"],
        [1, "Lighting", 1000, 20, 40, 3000, "Chiller", 2],
        [3, "Receptacles", 720, 20, "/", 3000, "/", 4],
        [5, None, None, None, "3P", 3000, "/", 6],
        [7, "Fan", 400, 15, 20, 300, "Sign", 8],
    ]
    pv = _preview(_xlsx(rows), panel="LP-1")
    got = {c.slot: c for c in pv.circuits["LP-1"]}
    assert got[2] == Circuit(2, 3, "Chiller", va=9000.0, breaker_amps=40)
    assert set(got) == {1, 2, 3, 7, 8}
    chiller = next(r for r in pv.rows if r.circuit is not None and r.circuit.slot == 2)
    (warning,) = chiller.problems
    assert warning.severity == Severity.WARNING and "sum of the breaker's rows 2, 3, 4" in warning.message
    assert pv.can_commit


def test_a_two_pole_without_a_poles_column_from_its_repeated_description():
    rows = [
        ["CKT", "DESCRIPTION", "VA", "TRIP", "TRIP", "VA", "DESCRIPTION", "CKT"],
        [1, "Dryer", 5000, 30, 20, 500, "Door", 2],
        [3, "Dryer", None, 30, 20, 500, "Door", 4],  # left: continuation; right: a second 1-pole circuit
    ]
    pv = _preview(_xlsx(rows), panel="LP-1")
    got = {c.slot: c for c in pv.circuits["LP-1"]}
    assert got == {
        1: Circuit(1, 2, "Dryer", va=5000.0, breaker_amps=30),
        2: Circuit(2, 1, "Door", va=500.0, breaker_amps=20),
        4: Circuit(4, 1, "Door", va=500.0, breaker_amps=20),
    }


def test_without_circuit_columns_slots_come_from_the_row_order_and_the_preview_says_so():
    rows = [
        ["Description", "kVA", "Breaker", "Description", "kVA", "Breaker"],
        ["Lights", 0.5, 20, "Receptacles", 0.72, 20],
        None,  # an empty pair of positions: slots 3 and 4
        ["Heater", 1.5, 20, "Demand meter", 0.1, 15],  # a load's name, not a totals row: it has a breaker
        ["Sub-total", 2.0, None, None, 0.82, None],
    ]
    pv = _preview(_xlsx(rows), panel="LP-1")
    got = {c.slot: (c.description, c.va) for c in pv.circuits["LP-1"]}
    assert got == {1: ("Lights", 500.0), 2: ("Receptacles", 720.0), 5: ("Heater", 1500.0), 6: ("Demand meter", 100.0)}
    assert all(r.slot_inferred for r in pv.rows if r.circuit is not None)
    (note,) = pv.notes
    assert "slots are inferred from the row order" in note and "left and right" in note
    assert pv.error_count == 0 and pv.can_commit


def test_a_two_column_csv_reads_the_same_way():
    text = (
        "Ckt,Load,kVA,Trip,Ph,Trip,kVA,Load,Ckt\r\n"
        "1,Lights,0.9,20,A,30,2.4,Dryer,2\r\n"
        "3,Receptacles,0.72,20,B,/,2.4,/,4\r\n"
        ",Total,1.62,,,,4.8,,\r\n"
    )
    pv = _preview(text.encode("utf-8"), name="two.csv", panel="LP-1")
    assert pv.plans[0].mapping.split == 5
    got = {c.slot: (c.poles, c.description, c.va) for c in pv.circuits["LP-1"]}
    assert got == {1: (1, "Lights", 900.0), 2: (2, "Dryer", 4800.0), 3: (1, "Receptacles", 720.0)}
    assert pv.can_commit and pv.warning_count == 1  # the dryer's load is the sum of its two rows


def test_a_half_without_its_own_circuit_column_sits_beside_the_other_half():
    rows = [
        ["CKT", "DESCRIPTION", "VA", "TRIP", "TRIP", "VA", "DESCRIPTION"],
        [1, "Lights", 500, 20, 20, 700, "Receptacles"],
        None,  # layout: with the left half numbered, a blank row is not a table row
        [3, "Fan", 300, 15, None, None, None],
        [5, "Heater", 1500, 20, 20, 400, "Sign"],
    ]
    pv = _preview(_xlsx(rows), panel="LP-1")
    got = {c.slot: c.description for c in pv.circuits["LP-1"]}
    assert got == {1: "Lights", 2: "Receptacles", 3: "Fan", 5: "Heater", 6: "Sign"}
    inferred = {r.circuit.slot for r in pv.rows if r.circuit is not None and r.slot_inferred}
    assert inferred == {2, 6}
    (note,) = pv.notes
    assert "no circuit-number column on the right half" in note


def test_left_and_right_both_claiming_slot_7_is_an_error_naming_rows_and_columns():
    rows = [
        ["CKT", "DESCRIPTION", "VA", "TRIP", "TRIP", "VA", "DESCRIPTION", "CKT"],
        [5, "Lights", 500, 20, 20, 500, "Fan", 6],
        [7, "Heater", 1500, 20, 20, 300, "Sign", 7],
    ]
    pv = _preview(_xlsx(rows), name="dup.xlsx", panel="LP-1")
    assert not pv.can_commit
    sign = next(r for r in pv.rows if r.side == "right" and r.sheet_row == 3)
    errors = [p for p in sign.problems if p.severity == Severity.ERROR]
    assert [(p.message, p.column) for p in errors] == [
        (
            "slot 7 is claimed twice: by the left half of row 3 (column A) and by the right half of row 3 (column H)",
            7,
        )
    ]
    # the right half holding an odd slot is flagged too
    assert any(p.severity == Severity.WARNING and "odd left, even right" in p.message for p in sign.problems)
    lines = pv.problem_lines()
    assert any(
        line.startswith("error: dup.xlsx, sheet 'LP-1', row 3 (right half), panel LP-1, slot 7, column H, slot:")
        for line in lines
    )
    # the heater keeps slot 7; the second claimant never reaches the panel
    assert [c.description for c in pv.circuits["LP-1"] if c.slot == 7] == ["Heater"]


def test_a_phase_letter_that_contradicts_the_slot_is_a_warning():
    rows = [TWO_HEADERS, [1, "Lights", 500, 1, 20, "C", 20, 1, 500, "Fan", 2]]
    pv = _preview(_xlsx(rows), panel="LP-1")
    messages = [(r.side, p.message) for r in pv.rows for p in r.problems]
    assert len(messages) == 2  # both halves read the middle column
    assert all("the phase column says C, but slot" in m for _, m in messages)
    assert pv.can_commit  # warnings only: the slot decides


def test_a_continuation_row_that_names_another_load_is_a_new_circuit_and_the_engine_sees_the_overlap():
    rows = [
        ["CKT", "DESCRIPTION", "VA", "POLES", "TRIP", "TRIP", "POLES", "VA", "DESCRIPTION", "CKT"],
        [1, "Lights", 500, 1, 20, 30, 2, 4000, "Oven", 2],
        [3, "Fan", 300, 1, 15, 20, 1, 800, "Toaster", 4],  # the oven takes 2 and 4: the toaster overlaps
    ]
    pv = _preview(_xlsx(rows), panel="LP-1")
    toaster = next(r for r in pv.rows if r.circuit is not None and r.circuit.slot == 4)
    assert any("overlap at slot 4" in p.message and p.column == 9 for p in toaster.problems)
    assert not pv.can_commit


# --------------------------------------------------------------------------- the mapping as JSON


def test_mapping_json_switches_layouts_and_corrects_each_half():
    grid = read_upload(messy_two_column_xlsx(), "m.xlsx").sheets[0]
    single = parse_overrides({"layout": "single"}, grid)
    assert single.layout == Layout.SINGLE and single.split is None
    moved = parse_overrides({"right_starts": "F"}, grid)
    assert moved.split == 5 and moved.roles[5] == Role.PHASE
    fixed = parse_overrides({"layout": "two-column", "right": {"LOAD kVA": "va"}, "left": {"LOAD kVA": "va"}}, grid)
    assert fixed.roles[8] == Role.LOAD_VA and fixed.roles[2] == Role.LOAD_VA
    # a column given a role the other half also has keeps both (each half has its own)
    both = parse_overrides({"columns": {"D": "breaker", "G": "breaker"}}, grid)
    assert both.roles[3] == Role.BREAKER and both.roles[6] == Role.BREAKER
    assert parse_overrides(fixed.to_json(), grid) == fixed  # the shown JSON reads back as the same map


@pytest.mark.parametrize(
    ("mapping", "message"),
    [
        ({"layout": "three-column"}, "layout must be 'single' or 'two-column'"),
        ({"right_starts": "A"}, "right_starts must be a column letter from B to"),
        ({"right_starts": 7}, "right_starts must be a column letter"),
        ({"layout": "single", "right_starts": "F"}, "right_starts applies to the two-column layout only"),
        ({"layout": "single", "left": {"A": "slot"}}, '"left" applies to the two-column layout'),
        ({"right": {"Nope": "va"}}, "right 'Nope' is neither a column letter nor a header of the right half"),
        ({"left": {"H": "va"}}, "left 'H' is neither a column letter nor a header of the left half"),
        ({"right": {"I": "watts"}}, '"watts" is not a role'),
    ],
)
def test_bad_two_column_mapping_json_is_refused_by_name(mapping, message):
    grid = read_upload(messy_two_column_xlsx(), "m.xlsx").sheets[0]
    with pytest.raises(MappingError) as exc:
        parse_overrides(mapping, grid)
    assert message in str(exc.value)


def test_switching_a_two_column_sheet_to_single_reads_only_the_left_half_as_circuits():
    data = messy_two_column_xlsx()
    pv = _preview(data, panel="LP-1", mapping={"layout": "single"})
    # the single-column reading sees one slot column: the right half's circuits are not read
    assert {c.slot for c in pv.circuits.get("LP-1", ())} <= {1, 3, 5, 7, 9, 11}


# --------------------------------------------------------------------------- never a traceback

_CELLS = st.one_of(
    st.none(),
    st.integers(-3, 50),
    st.floats(-1.0, 1e5, allow_nan=False),
    st.sampled_from(["—", "/", "-", '"', "2P", "3 pole", "do", "A", "B", "AB", "spare", "SPACE", "TOTAL"]),
    st.sampled_from(["1,3,5", "2-4", "20/1", "40/3", "1.5 kVA", "12 A", "=SUM(C1:C3)", "x", ""]),
    st.text(max_size=8),
)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    rows=st.lists(st.lists(_CELLS, min_size=0, max_size=11), min_size=0, max_size=14),
    roles=st.lists(st.sampled_from(list(Role)), min_size=11, max_size=11),
    split=st.integers(1, 10),
)
def test_any_two_column_sheet_and_mapping_gives_a_preview_never_an_exception(rows, roles, split):
    """Whatever the cells and the roles, the preview comes back with its problems as messages."""
    grid = Grid("LP-1", tuple(tuple(r) for r in [TWO_HEADERS, *rows]), width=11)
    cmap = ColumnMap(header_row=0, roles=tuple(roles), headers=tuple(TWO_HEADERS), split=split).deduplicated()
    project = small_project()
    preview = build_preview("fuzz.xlsx", {"LP-1": grid}, [SheetPlan("LP-1", cmap, "LP-1")], project)
    assert all(isinstance(line, str) for line in preview.problem_lines())
    if preview.can_commit:
        # what would be stored passes the engine's own panel check
        problems: list = []
        check_panel(replace(project.panels[0], circuits=preview.circuits["LP-1"]), problems)
        assert problems == []
        assert len({c.slot for c in preview.circuits["LP-1"]}) == len(preview.circuits["LP-1"])
