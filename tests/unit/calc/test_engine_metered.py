"""The engine's metered existing load (NEC 220.87): the override replaces the existing circuits of a subtree.

Purpose-built project (invented), every schedule load at unity power factor, category
``equipment`` (100 % demand, NFPA 70-2023 Article 220, from memory):

    UTIL (208Y/120)
     └─ P1: slot 1 3P existing 9 000 VA, slot 2 3P new 6 000 VA, slot 7 3P → P2
          └─ P2: slot 1 3P existing 3 000 VA, slot 2 3P new 1 500 VA

A metered existing load of 20 000 VA at P1 (already maximum demand × 125 %, NEC 220.87(2))
replaces P1's and P2's existing circuits at P1: connected 20 000 + 6 000 + 1 500 = 27 500 VA,
all at 100 %.  P2 keeps its schedule (4 500 VA).  Current per phase at P1 (hand arithmetic):
metered 20 000/3 VA at pf 0.9 → P 6 000 W, Q 2 905.9 var; new 7 500/3 = 2 500 W →
|S| = √(8 500² + 2 905.9²) = 8 983.0 VA → 8 983.0/120 = 74.86 A.
"""

from __future__ import annotations

import math
from dataclasses import replace

from server.calc.demand import METERED_EXISTING
from server.calc.engine import METERED_PF, Calculator, compute_project
from server.calc.model import Category, Circuit, Panel, Project, ProjectInfo, Source, Status
from server.calc.projectfile import replace_panel
from tests.helpers import assert_close

W208 = "208Y/120 3PH 4W"


def _eq(slot: int, va: float, status: Status) -> Circuit:
    return Circuit(slot=slot, poles=3, category=Category.EQUIPMENT, va=va, pf=1.0, status=status, breaker_amps=60)


def project() -> Project:
    p1 = Panel(
        "P1",
        W208,
        fed_from="UTIL",
        circuits=(
            _eq(1, 9_000.0, Status.EXISTING),
            _eq(2, 6_000.0, Status.NEW),
            Circuit(slot=7, poles=3, feeds="P2", breaker_amps=60, status=Status.EXISTING),
        ),
    )
    p2 = Panel("P2", W208, circuits=(_eq(1, 3_000.0, Status.EXISTING), _eq(2, 1_500.0, Status.NEW)))
    return Project(ProjectInfo("Metered test"), (Source("UTIL", W208),), (), (p1, p2))


def test_without_override_the_schedule_counts() -> None:
    r = compute_project(project())
    assert_close(r.panels["P1"].demand_va, 19_500.0, what="P1 demand, schedule")
    assert METERED_EXISTING not in r.panels["P1"].connected_by_category


def test_override_replaces_the_existing_circuits_of_the_subtree() -> None:
    r = compute_project(project(), existing_load_override_va={"P1": 20_000.0})
    p1 = r.panels["P1"]
    assert_close(p1.connected_va_total, 27_500.0, what="metered + new of P1 and P2")
    assert_close(p1.demand_va, 27_500.0, what="everything at 100 %")
    assert_close(p1.connected_by_category[METERED_EXISTING], 20_000.0)
    assert_close(p1.connected_by_category["equipment"], 7_500.0, what="new loads only")
    step = next(s for s in p1.demand_steps if s.category == METERED_EXISTING)
    assert "220.87" in step.rule
    q = 20_000.0 / 3 * math.sqrt(1 - METERED_PF**2)
    expected_amps = math.hypot(20_000.0 / 3 * METERED_PF + 2_500.0, q) / 120.0
    assert_close(expected_amps, 74.86, rel=1e-3, what="hand arithmetic")
    for phase in "ABC":
        assert_close(p1.line_amps[phase], expected_amps, what=f"P1 phase {phase}")
    # The panel below keeps its schedule; the source above sees the metered figure.
    assert_close(r.panels["P2"].demand_va, 4_500.0)
    assert_close(r.sources["UTIL"].demand_va, 27_500.0)


def test_override_at_the_lower_panel_reaches_the_upper_one() -> None:
    r = compute_project(project(), existing_load_override_va={"P2": 5_000.0})
    assert_close(r.panels["P2"].demand_va, 6_500.0, what="5 000 metered + 1 500 new")
    assert_close(r.panels["P1"].demand_va, 9_000.0 + 6_000.0 + 6_500.0)


def test_incremental_update_keeps_the_override() -> None:
    proj = project()
    overrides = {"P1": 20_000.0}
    calc = Calculator(proj, existing_load_override_va=overrides)
    p2 = proj.panel("P2")
    assert p2 is not None
    new_p2 = replace(p2, circuits=(*p2.circuits, _eq(7, 2_400.0, Status.NEW)))
    incremental = calc.update_panel(new_p2)
    full = compute_project(replace_panel(proj, new_p2), existing_load_override_va=overrides)
    assert incremental.to_json() == full.to_json()
    assert_close(full.panels["P1"].demand_va, 27_500.0 + 2_400.0)


def test_removed_and_future_follow_the_usual_rules() -> None:
    proj = project()
    p1 = proj.panel("P1")
    assert p1 is not None
    p1 = replace(p1, circuits=(*p1.circuits, _eq(8, 1_200.0, Status.FUTURE)))
    proj = replace_panel(proj, p1)
    without = compute_project(proj, existing_load_override_va={"P1": 20_000.0}, include_future=False)
    with_future = compute_project(proj, existing_load_override_va={"P1": 20_000.0}, include_future=True)
    assert_close(with_future.panels["P1"].demand_va - without.panels["P1"].demand_va, 1_200.0)
