"""Arranging results for the pages: the panelboard grid and the riser layout (no HTTP, no database)."""

from __future__ import annotations

from server.calc.model import Circuit, Panel, Project, ProjectInfo, Source, Transformer
from server.calc.results import ProjectResult
from server.services import Snapshot
from server.web.views import panel_rows, riser_layout, tree_nodes


def _panel(system: str, spaces: int, *circuits: Circuit) -> Panel:
    return Panel(tag="P", system=system, fed_from="S", spaces=spaces, circuits=circuits)


def test_rows_pair_odd_left_even_right_with_bus_phase_by_row():
    rows = panel_rows(_panel("208Y/120 3PH 4W", 12, Circuit(1, va=100), Circuit(2, va=200)), None)
    assert [(r.left.slot, r.right.slot, r.phase) for r in rows] == [
        (1, 2, "A"),
        (3, 4, "B"),
        (5, 6, "C"),
        (7, 8, "A"),
        (9, 10, "B"),
        (11, 12, "C"),
    ]  # common practice: three-phase bus phases repeat A, B, C down the rows
    assert rows[0].left.kind == "circuit" and rows[0].right.kind == "circuit" and rows[1].left.kind == "empty"


def test_multi_pole_breaker_spans_its_rows_and_covers_the_slots_below():
    rows = panel_rows(_panel("208Y/120 3PH 4W", 12, Circuit(3, poles=3, va=9000), Circuit(4, poles=2, va=1)), None)
    left = [r.left for r in rows]
    assert (left[1].kind, left[1].rowspan) == ("circuit", 3)
    assert [c.kind for c in left[2:4]] == ["covered", "covered"]
    assert (rows[1].right.rowspan, rows[2].right.kind, rows[3].right.kind) == (2, "covered", "empty")


def test_split_phase_rows_alternate_a_b_and_odd_spaces_leave_a_blank():
    rows = panel_rows(_panel("120/240 1PH 3W", 5), None)
    assert [r.phase for r in rows] == ["A", "B", "A"]
    assert rows[-1].right.kind == "none"


def test_rejected_edit_shows_the_typed_values_and_errors_on_its_slot():
    rows = panel_rows(
        _panel("208Y/120 3PH 4W", 6, Circuit(1, va=100)),
        None,
        override_slot=1,
        override_values={"va": "lots"},
        errors={"va": "must be a number"},
    )
    assert rows[0].left.values["va"] == "lots" and rows[0].left.errors == {"va": "must be a number"}


def _snap(project: Project) -> Snapshot:
    return Snapshot(1, 1, False, project, ProjectResult("NEC-2023", False, {}, {}, {}))


def test_riser_centres_each_parent_over_its_children():
    project = Project(
        ProjectInfo("x"),
        sources=(Source("S", "480Y/277 3PH 4W"),),
        transformers=(Transformer("T", 45, "480 3PH 3W", "208Y/120 3PH 4W", fed_from="S"),),
        panels=(
            Panel("A", "480Y/277 3PH 4W", fed_from="S"),
            Panel("B", "208Y/120 3PH 4W", fed_from="T"),
        ),
    )
    nodes = tree_nodes(_snap(project))
    assert [(n.badge.tag, n.depth) for n in nodes] == [("S", 0), ("T", 1), ("B", 2), ("A", 1)]
    riser = riser_layout(nodes)
    x = {b.node.badge.tag: b.x for b in riser.boxes}
    y = {b.node.badge.tag: b.y for b in riser.boxes}
    assert x["S"] == (x["T"] + x["A"]) / 2 and x["T"] == x["B"] and x["A"] > x["B"]
    assert y["S"] < y["T"] == y["A"] < y["B"]
    assert len(riser.links) == 3
    assert riser.width >= x["A"] + riser.box_w
