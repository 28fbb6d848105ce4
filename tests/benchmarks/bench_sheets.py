"""Benchmark: spreadsheet import of a 2,000-row circuit table (parse + map + validate).

Run as ``python -m tests.benchmarks.bench_sheets`` or ``pytest tests/benchmarks/bench_sheets.py``.
The floor is openpyxl alone reading the same workbook (``read_only=True``, every value
iterated), measured in the same run, alternating with the import; the figure is the ratio of
medians.  Target: ≤ 2×.

The sheet holds 2,000 circuits of ten invented 208Y/120 panels (200 spaces each) in the
shape the CSV export writes: a Panel column, then Slot, Poles, Description, Category, kVA,
Trip "20/1" notation and Phase, so the import does every step: the zip checks, reading, header
guess, notation parsing, kVA conversion, parse_circuit per row, check_panel per panel and
check_topology for the project.

A second figure does the same for a two-column workbook: the same 2,000 circuits as ten panel
sheets of 100 rows, odd slots in the left half and even in the right, with a 3-pole breaker
every tenth row whose further rows are marked "—" (split detection, both halves per row, the
continuation rows merged).
"""

from __future__ import annotations

import io
import random
import statistics
import sys
import time

import openpyxl

from server.calc.projectfile import parse_project
from server.calc.systems import SYSTEMS, breaker_phases
from server.sheets import plan_sheets, preview_upload, read_upload

ROWS = 2_000
PANELS = 10
REPEATS = 7
TARGET_RATIO = 2.0
SYSTEM = "208Y/120 3PH 4W"


def make_project():
    return parse_project(
        {
            "format": "panelwright.project",
            "version": 1,
            "project": {"name": "Bench", "number": "B-1"},
            "sources": [{"tag": "SVC", "system": SYSTEM}],
            "panels": [
                {"tag": f"P{i:02d}", "system": SYSTEM, "fed_from": "SVC", "spaces": 200, "circuits": []}
                for i in range(PANELS)
            ],
        }
    )


def make_workbook(seed: int = 11) -> bytes:
    rnd = random.Random(seed)
    spec = SYSTEMS[SYSTEM]
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Circuits"
    ws.append(["Panel", "Slot", "Poles", "Description", "Category", "Load (kVA)", "Trip", "Phase"])
    per_panel = ROWS // PANELS
    cats = ["Lighting", "Recept", "HVAC", "Equip", "Heat"]
    for i in range(PANELS):
        for slot in range(1, per_panel + 1):
            ws.append(
                [
                    f"P{i:02d}",
                    slot,
                    1,
                    f"Load {i}-{slot}",
                    rnd.choice(cats),
                    round(rnd.uniform(0.1, 2.0), 2),
                    f"{rnd.choice([15, 20, 30])}/1",
                    breaker_phases(spec, slot, 1)[0],
                ]
            )
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


TWO_HEADERS = ["CKT", "DESCRIPTION", "CATEGORY", "kVA", "POLES", "TRIP", "PH", "TRIP", "POLES", "kVA"]
TWO_HEADERS += ["CATEGORY", "DESCRIPTION", "CKT"]


def make_two_column_workbook(seed: int = 12) -> tuple[bytes, int]:
    """Ten sheets named after the panels; returns the workbook and its circuit count."""
    rnd = random.Random(seed)
    spec = SYSTEMS[SYSTEM]
    cats = ["Lighting", "Recept", "HVAC", "Equip", "Heat"]
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    count = 0
    rows_per_panel = ROWS // PANELS // 2
    for i in range(PANELS):
        ws = wb.create_sheet(f"P{i:02d}")
        ws.append([f"PANEL P{i:02d} {SYSTEM}"])
        ws.append(TWO_HEADERS)
        right_cont = 0
        for n in range(1, rows_per_panel + 1):
            left = [2 * n - 1, f"Load {i}-{2 * n - 1}", rnd.choice(cats), round(rnd.uniform(0.1, 2.0), 2), 1, 20]
            count += 1
            if right_cont:
                right = ["—", "—", "", "", "", 2 * n]
                right_cont -= 1
            elif n % 10 == 1 and n + 2 <= rows_per_panel:
                right = [40, 3, round(rnd.uniform(3.0, 9.0), 2), "HVAC", f"RTU {i}-{n}", 2 * n]
                right_cont = 2
                count += 1
            else:
                right = [20, 1, round(rnd.uniform(0.1, 2.0), 2), rnd.choice(cats), f"Load {i}-{2 * n}", 2 * n]
                count += 1
            ws.append([*left, breaker_phases(spec, 2 * n - 1, 1)[0], *right])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue(), count


def floor(data: bytes) -> int:
    wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=False)
    n = 0
    for ws in wb.worksheets:
        for row in ws.iter_rows(values_only=True):
            n += len(row)
    wb.close()
    return n


def run_import(data: bytes, project, layout: str = "single") -> int:
    book = read_upload(data, "bench.xlsx")
    plans = plan_sheets(book, project)
    if {p.mapping.layout.value for p in plans} != {layout}:
        raise AssertionError(f"expected the {layout} layout to be detected")
    preview = preview_upload(book, plans, project)
    if not preview.can_commit:
        raise AssertionError("\n".join(preview.problem_lines(10)))
    return sum(len(c) for c in preview.circuits.values())


def _timed(fn, *args) -> float:
    t0 = time.perf_counter()
    fn(*args)
    return time.perf_counter() - t0


def _measure(data: bytes, project, layout: str) -> dict[str, float]:
    floor(data)  # warm both paths once
    run_import(data, project, layout)
    # Floor and import alternate, so a change in machine load during the run hits both alike.
    floors, imports = [], []
    for _ in range(REPEATS):
        floors.append(_timed(floor, data))
        imports.append(_timed(run_import, data, project, layout))
    t_floor, t_import = statistics.median(floors), statistics.median(imports)
    return {"floor_s": t_floor, "import_s": t_import, "ratio": t_import / t_floor, "bytes": len(data)}


def measure() -> dict[str, float]:
    data = make_workbook()
    project = make_project()
    assert run_import(data, project) == ROWS
    return _measure(data, project, "single")


def measure_two_column() -> dict[str, float]:
    data, count = make_two_column_workbook()
    project = make_project()
    assert run_import(data, project, "two-column") == count
    figures = _measure(data, project, "two-column")
    figures["circuits"] = count
    return figures


def report(figures: dict[str, float], what: str = "") -> str:
    circuits = int(figures.get("circuits", ROWS))
    return (
        f"sheets import{what}, {circuits} circuits / {PANELS} panels ({figures['bytes'] / 1024:.0f} kB XLSX), "
        f"median of {REPEATS}:\n"
        f"  floor (openpyxl read_only, values only): {figures['floor_s'] * 1000:8.1f} ms\n"
        f"  import (checks + read + map + validate): {figures['import_s'] * 1000:8.1f} ms\n"
        f"  ratio: {figures['ratio']:.2f}x (target <= {TARGET_RATIO:.1f}x)"
    )


def test_bench_sheets_import() -> None:
    print()
    print(report(measure()))
    print(report(measure_two_column(), " (two-column)"))


if __name__ == "__main__":
    print(report(measure()))
    print(report(measure_two_column(), " (two-column)"))
    sys.exit(0)
