"""Fixtures of the spreadsheet tests: a small valid project and the messy sheet made with openpyxl."""

from __future__ import annotations

import io

import pytest

from server.calc.model import Project
from server.calc.projectfile import parse_project


def small_project(system: str = "208Y/120 3PH 4W", spaces: int = 42, tags: tuple[str, ...] = ("LP-1",)) -> Project:
    """A source feeding panels by name (invented tags)."""
    return parse_project(
        {
            "format": "panelwright.project",
            "version": 1,
            "project": {"name": "Sheet test", "number": "T-1"},
            "sources": [{"tag": "SVC", "system": system}],
            "panels": [
                {"tag": tag, "system": system, "fed_from": "SVC", "spaces": spaces, "circuits": []} for tag in tags
            ],
        }
    )


@pytest.fixture
def project() -> Project:
    return small_project()


def messy_xlsx() -> bytes:
    """A hand-made-looking schedule: title block, merged two-row header, blank rows, a kVA
    column, a phase column, a Notes column, "20/1" and "1,3,5"-style notations, totals below."""
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = "Sched"
    ws["A1"] = "PANEL LP-1   208Y/120 3PH 4W   225 A MLO"
    ws.merge_cells("A1:H1")
    ws["A3"], ws["B3"], ws["C3"], ws["E3"], ws["F3"], ws["G3"], ws["H3"] = (
        "CKT",
        "LOAD DESCRIPTION",
        "BREAKER",
        "LOAD",
        "PH",
        "TYPE",
        "Notes",
    )
    ws.merge_cells("C3:D3")
    ws.merge_cells("A3:A4")
    ws.merge_cells("B3:B4")
    ws["C4"], ws["D4"], ws["E4"] = "TRIP", "POLES", "kVA"
    rows = [
        (1, "Lighting - Office 101", 20, 1, 1.2, "A", "Lighting", "LED troffers"),
        (3, "Receptacles - Office 101", 20, 1, 0.9, "B", "Recept", None),
        None,
        ("5,7,9", "RTU-1", 40, 3, 9.6, "ABC", "HVAC", "Roof"),
        (2, "Copier", "20/1", None, 1.5, "A", "Equip", None),
        ("4-6", "Water heater", 30, 2, 4.5, "B,C", "Heat", None),
        (8, "EV charger, bay 1", "40/2", None, 7.2, "AB", "EV", "Bay 1"),
        (11, "Mystery load", 20, 1, 0.5, "A", "Widgets", None),
        None,
        None,
        (None, "TOTAL CONNECTED kVA", None, None, "=SUM(E5:E13)", None, None, None),
        (None, "Phase A", None, None, 5.0, None, None, None),
    ]
    r = 5
    for row in rows:
        if row is not None:
            for c, v in enumerate(row, start=1):
                if v is not None:
                    ws.cell(row=r, column=c, value=v)
        r += 1
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


@pytest.fixture
def messy_bytes() -> bytes:
    return messy_xlsx()
