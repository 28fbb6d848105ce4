"""Revision delta markers: they appear exactly on the rows and values changed since the
previous issued revision, and each sheet lists the revisions that changed it."""

from __future__ import annotations

import copy
import json

import pytest

from server.calc.projectfile import dump_project, load_project_file, parse_project
from server.pdf.issue import compute, history_for, make_set
from server.pdf.sheets import RevisionInfo
from tests.helpers import DEMO_FILE
from tests.unit.pdf.pdftext import MARKER, panel_pages, read_pages, schedule_markers

REV2 = RevisionInfo(2, "2026-12-02", "Owner comments", "RA")


def _panel(data: dict, tag: str) -> dict:
    return next(p for p in data["panels"] if p["tag"] == tag)


def _circuit(panel: dict, slot: int) -> dict:
    return next(c for c in panel["circuits"] if c["slot"] == slot)


@pytest.fixture(scope="module")
def two_revisions(tmp_path_factory):
    """Rev 1 = the demo; rev 2 edits four circuits in three panels (an added load, a changed
    VA, a new description and a removed circuit)."""
    old = load_project_file(DEMO_FILE)
    data = copy.deepcopy(dump_project(old))
    lp1 = _panel(data, "LP-1")
    _circuit(lp1, 3)["va"] += 400  # changed load
    _circuit(lp1, 10)["description"] = "IT rack R-1 (with UPS)"  # changed text only
    lp2 = _panel(data, "LP-2")
    lp2["circuits"] = [c for c in lp2["circuits"] if c["slot"] != 17]  # removed circuit
    ws1 = _panel(data, "WS-1")
    # WS-1 is a high-leg delta: a 120 V load goes on an A or C row, never the B (high-leg) row.
    free = next(s for s in range(1, ws1["spaces"] + 1) if not _occupied(ws1, s) and ((s + 1) // 2 - 1) % 3 != 1)
    ws1["circuits"].append(
        {"slot": free, "poles": 1, "description": "Bench grinder", "category": "motor", "va": 900, "status": "new"}
    )
    new = parse_project(json.loads(json.dumps(data)))
    result = compute(new)
    history = history_for(
        new,
        result,
        current=REV2,
        previous=old,
        previous_revision=RevisionInfo(1, "2026-11-30", "Issued for permit", "JK"),
    )
    pdf, _ = make_set(new, result, history, cache_dir=tmp_path_factory.mktemp("cache"))
    return old, new, result, history, free, read_pages(pdf)


def _occupied(panel: dict, slot: int) -> bool:
    for c in panel["circuits"]:
        poles = max(c.get("poles", 1) or 1, 1)
        if slot in range(c["slot"], c["slot"] + 2 * poles, 2):
            return True
    return False


def _feeding_slots(project, tag: str) -> set[tuple[str, int]]:
    """The breaker feeding ``tag`` and every breaker feeding its ancestors (their VA changes)."""
    out = set()
    node = tag
    while True:
        via = next(((p.tag, c.slot) for p in project.panels for c in p.circuits if c.feeds == node), None)
        up = next((e.fed_from for e in (*project.panels, *project.transformers) if e.tag == node), None)
        if via is not None:
            out.add(via)
            node = via[0]
        elif up is not None:
            node = up
        else:
            return out


def test_markers_sit_exactly_on_the_changed_circuit_rows(two_revisions):
    old, new, result, history, free, pages = two_revisions
    expected = {("LP-1", 3), ("LP-1", 10), ("LP-2", 17), ("WS-1", free)}
    # A changed load changes the VA printed on every breaker feeding its panel, up to the service;
    # a text-only edit does not.
    for tag in ("LP-1", "LP-2", "WS-1"):
        expected |= _feeding_slots(new, tag)
    found = panel_pages(pages)
    marked = set()
    for tag, ps in found.items():
        slots, count = schedule_markers(ps[0])
        assert count == len(slots), f"{tag}: one marker per changed row"
        marked |= {(tag, s) for s in slots}
    assert marked == expected
    assert set(history.deltas.circuits) == expected


def test_markers_carry_the_revision_number(two_revisions):
    *_, pages = two_revisions
    page = panel_pages(pages)["LP-1"][0]
    triangles = [c for c in page.chars if c["text"] == MARKER]
    assert triangles
    for t in triangles:
        inside = [
            c
            for c in page.chars
            if c["text"] == "2"
            and t["x0"] <= c["x0"]
            and c["x1"] <= t["x1"] + 1
            and t["top"] - 2 <= c["top"]
            and c["bottom"] <= t["bottom"] + 2
        ]
        assert inside, "each triangle holds the revision number"


def test_unchanged_sheets_have_no_markers_and_keep_their_revision(two_revisions):
    old, new, result, history, free, pages = two_revisions
    found = panel_pages(pages)
    touched = {"LP-1", "LP-2", "WS-1"} | {t for t, _ in history.deltas.circuits} | {t for t, _ in history.deltas.values}
    for tag, ps in found.items():
        has_markers = any(c["text"] == MARKER for c in ps[0].chars)
        if tag not in touched:
            assert not has_markers, f"{tag} did not change: no markers"
            assert "Owner comments" not in ps[0].strip, f"{tag}: revision 2 did not change this sheet"
        else:
            assert has_markers
            assert "Owner comments" in ps[0].strip
    untouched = set(found) - touched
    assert untouched, "some panels did not change and keep revision 1"
    # LP-1K itself was not edited, but it hangs below LP-1: only its cumulative voltage drop moved.
    assert {k for t, k in history.deltas.values if t == "LP-1K"} <= {"feeder.cumulative_voltage_drop_pct"}
    assert not any(t == "LP-1K" for t, _ in history.deltas.circuits)


def test_changed_totals_are_marked_and_text_edits_do_not_move_numbers(two_revisions):
    old, new, result, history, *_ = two_revisions
    d = history.deltas
    assert d.value("LP-1", "demand_va") and d.value("LP-1", "connected_va_total")
    assert d.value("WS-1", "connected_va_total")
    # The transformer feeding LP-1 now carries more load.
    assert d.value(new.panel("LP-1").fed_from, "load_kva")
    assert not d.value("LP-1K", "demand_va")


def test_first_issue_and_draft_have_no_markers(tmp_path):
    project = load_project_file(DEMO_FILE)
    result = compute(project)
    for history in (
        history_for(project, result, current=RevisionInfo(1, "2026-11-30")),
        history_for(project, result, current=None),
    ):
        pdf, _ = make_set(project, result, history, select=["LP-1", "T-1"], cache_dir=tmp_path)
        pages = read_pages(pdf)
        assert not any(c["text"] == MARKER for p in pages for c in p.chars)
    draft = read_pages(
        make_set(project, result, history_for(project, result, current=None), select=["LP-1"], cache_dir=tmp_path)[0]
    )
    assert "DRAFT — not issued" in draft[0].flat


def test_a_feeder_landing_is_printed_and_marked_when_it_changes(tmp_path):
    # LP-1K is a 208Y/120 panel fed from LP-1: landing its feeder rotated is allowed.
    old = load_project_file(DEMO_FILE)
    data = copy.deepcopy(dump_project(old))
    _panel(data, "LP-1K")["feeder_rotation"] = 1
    new = parse_project(json.loads(json.dumps(data)))
    result = compute(new)
    history = history_for(
        new, result, current=REV2, previous=old, previous_revision=RevisionInfo(1, "2026-11-30", "Issued for permit")
    )
    pages = panel_pages(read_pages(make_set(new, result, history, select=["LP-1K", "LP-2"], cache_dir=tmp_path)[0]))
    lp1k = " ".join(p.flat for p in pages["LP-1K"])
    assert "landed A→B, B→C, C→A" in lp1k
    assert f"{MARKER} 2 landed A→B" in lp1k  # the revision 2 delta marker on the changed landing
    assert "landed" not in " ".join(p.flat for p in pages["LP-2"])
