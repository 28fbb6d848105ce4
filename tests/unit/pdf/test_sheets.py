"""server.pdf.sheets: panelboard order, sheet selection, revision history per sheet."""

from __future__ import annotations

import pytest

from server.calc.projectfile import parse_project
from server.pdf.deltas import Deltas
from server.pdf.issue import compute
from server.pdf.sheets import IssueHistory, RevisionInfo, build_sheets, printed_values, schedule_rows


def _project():
    return parse_project(
        {
            "format": "panelwright.project",
            "version": 1,
            "project": {"name": "Small test", "number": "T-01", "firm": "Test firm"},
            "sources": [{"tag": "SVC", "system": "208Y/120 3PH 4W", "fault_ka": 22}],
            "transformers": [],
            "panels": [
                {
                    "tag": "PA",
                    "system": "208Y/120 3PH 4W",
                    "fed_from": "SVC",
                    "spaces": 12,
                    "sccr_ka": 10,
                    "feeder": {"length_ft": 40},
                    "circuits": [
                        {"slot": 1, "description": "Lights", "category": "lighting", "va": 1200, "breaker_amps": 20},
                        {
                            "slot": 2,
                            "poles": 3,
                            "description": "Fan",
                            "category": "motor",
                            "va": 6000,
                            "breaker_amps": 30,
                        },
                        {
                            "slot": 3,
                            "description": "Receptacles",
                            "category": "receptacle",
                            "va": 900,
                            "breaker_amps": 20,
                            "status": "future",
                        },
                        {"slot": 9, "poles": 0, "description": "Space"},
                    ],
                }
            ],
        }
    )


def test_rows_follow_the_panelboard():
    project = _project()
    result = compute(project)
    panel = project.panel("PA")
    rows = schedule_rows(panel, result.panels["PA"], Deltas())
    assert len(rows) == 6  # 12 spaces, two per row
    assert [r.phase for r in rows] == ["A", "B", "C", "A", "B", "C"]
    assert [(r.left.slot, r.right.slot) for r in rows] == [(1, 2), (3, 4), (5, 6), (7, 8), (9, 10), (11, 12)]
    # The 3-pole fan at slot 2 takes 2, 4, 6: first pole carries its description, the others continue.
    assert rows[0].right.kind == "load" and rows[0].right.breaker == "30/3"
    assert rows[1].right.kind == "pole" and rows[2].right.kind == "pole"
    assert sum(r.right.va for r in rows[:3]) == pytest.approx(6000)
    assert rows[1].left.counted is False  # future, not included
    assert rows[4].left.kind == "space" and rows[3].left.kind == "empty"


def test_select_by_tag_or_number_and_unknown_names():
    project = _project()
    result = compute(project)
    every = build_sheets(project, result)
    assert [s.key for s in every][0] == "*index*:1"
    assert {s.key for s in build_sheets(project, result, select=["PA"])} == {"PA"}
    numbers = [s.number for s in every]
    assert {s.number for s in build_sheets(project, result, select=[numbers[1]])} == {numbers[1]}
    with pytest.raises(KeyError, match="NOPE"):
        build_sheets(project, result, select=["PA", "NOPE"])


def test_sheet_revisions_list_only_the_revisions_that_changed_it():
    project = _project()
    result = compute(project)
    history = IssueHistory(
        current=RevisionInfo(3, "2026-12-03", "third"),
        earlier=(RevisionInfo(1, "2026-12-01", "first"), RevisionInfo(2, "2026-12-02", "second")),
        touched={1: None, 2: frozenset({"*index*:1"})},
        deltas=Deltas(revision=3),
        first_issue=False,
    )
    pa = next(s for s in build_sheets(project, result, history) if s.key == "PA")
    assert [r.number for r in pa.context.title.revisions] == [1]  # untouched by 2 and 3
    index = build_sheets(project, result, history, select=["index"])[0]
    assert [r.number for r in index.context.title.revisions] == [1, 2, 3]
    assert [r.number for r in index.context.history] == [1, 2, 3]


def test_printed_values_use_the_template_formats():
    project = _project()
    result = compute(project)
    r = result.panels["PA"]
    values = printed_values(project, result)["PA"]
    assert values["demand_va"] == f"{round(r.demand_va):,}"
    assert values["fault_ka"] == f"{r.fault_ka:,.1f} kA"


def test_sheet_cache_round_trip_and_prune(tmp_path):
    import os
    import time

    from server.pdf.render import SheetCache, cache_key

    cache = SheetCache(tmp_path, max_files=2)
    keys = [cache_key(f"<p>{i}</p>") for i in range(3)]
    assert len(set(keys)) == 3
    for i, k in enumerate(keys):
        cache.put(k, f"%PDF-{i}".encode())
        os.utime(cache._path(k), (time.time() - 100 + i, time.time() - 100 + i))
    assert cache.get(keys[0]) == b"%PDF-0"  # a hit makes it the most recent
    assert cache.prune() == 1
    assert cache.get(keys[1]) is None and cache.get(keys[0]) == b"%PDF-0" and cache.get(keys[2]) == b"%PDF-2"
