"""Property: any valid panel written as XLSX (one circuit per row or two-column) or CSV imports back to the same circuits."""

from __future__ import annotations

from dataclasses import replace

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from server.calc.engine import compute_project
from server.calc.model import Category, Circuit, Status
from server.calc.projectfile import replace_panel
from server.sheets import plan_sheets, preview_upload, read_upload
from server.sheets.export import circuits_csv, project_xlsx
from server.sheets.mapping import Layout

from .conftest import small_project

TEXT = st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")), max_size=30).map(str.strip)


@st.composite
def circuits(draw):
    """Non-overlapping circuits on a 42-space 208Y/120 panel (each slot's phases are free)."""
    taken: set[int] = set()
    out = []
    for slot in range(1, 43):
        if slot in taken or not draw(st.booleans()):
            continue
        poles = draw(st.sampled_from([0, 1, 1, 1, 2, 3]))
        span = [slot + 2 * i for i in range(max(poles, 1))]
        if span[-1] > 42 or taken & set(span):
            continue
        taken |= set(span)
        if poles == 0:
            out.append(Circuit(slot, 0, draw(TEXT), notes=draw(TEXT)))
            continue
        out.append(
            Circuit(
                slot=slot,
                poles=poles,
                description=draw(TEXT),
                category=draw(st.none() | st.sampled_from(list(Category))),
                va=draw(st.none() | st.floats(0, 50_000, allow_nan=False).map(lambda x: round(x, 2))),
                pf=draw(st.none() | st.floats(0.5, 1.0).map(lambda x: round(x, 3))),
                continuous=draw(st.none() | st.booleans()),
                breaker_amps=draw(st.none() | st.sampled_from([15, 20, 30, 40, 60, 100])),
                status=draw(st.sampled_from(list(Status))),
                harmonic3_pct=draw(st.sampled_from([0.0, 15.0, 33.3])),
                locked=draw(st.booleans()),
                notes=draw(TEXT),
            )
        )
    return tuple(out)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(circuits())
def test_csv_and_xlsx_round_trip(cs):
    base = small_project()
    project = replace_panel(base, replace(base.panels[0], circuits=cs))
    result = compute_project(project)
    for data, name in (
        (circuits_csv(project), "p.csv"),
        (project_xlsx(project, result), "p.xlsx"),
        (project_xlsx(project, result, layout=Layout.TWO_COLUMN), "two-column.xlsx"),
    ):
        book = read_upload(data, name)
        if not cs:
            return  # an empty table has nothing to import (the preview says so)
        preview = preview_upload(book, plan_sheets(book, project), project)
        assert preview.can_commit, preview.problem_lines(5)
        assert preview.circuits["LP-1"] == cs, name
