"""What-if preview: best slot and phase, slot rules, totals of the panel and every ancestor.

Purpose-built projects (invented).  Equipment loads count at 100 % (NFPA 70-2023 Article 220,
from memory), so an added equipment load raises every ancestor's demand by exactly its VA.
Slot → phase (common practice, this program's convention): rows A, B, C, A…; slot 2n−1 and
2n share row n.  Breaker: NEC 240.6(A) standard ratings (from memory: 15, 20, 25, 30 …).
"""

from __future__ import annotations

import pytest

from server.calc.engine import compute_project
from server.calc.errors import ProjectFileError
from server.calc.model import Category, Circuit, Panel, Project, ProjectInfo, Source, Status
from server.calc.systems import SYSTEMS, breaker_phases
from server.calc.whatif import AddedLoad, preview
from tests.helpers import assert_close

W208 = "208Y/120 3PH 4W"
HIGH_LEG = "240/120 3PH 4W"


def _c(slot: int, va: float, poles: int = 1) -> Circuit:
    return Circuit(slot=slot, poles=poles, category=Category.EQUIPMENT, va=va, pf=1.0, status=Status.EXISTING)


def _project(*panels: Panel, system: str = W208) -> Project:
    return Project(ProjectInfo("What-if test"), (Source("UTIL", system),), (), panels)


def _two_level() -> Project:
    top = Panel("TOP", W208, fed_from="UTIL", circuits=(Circuit(slot=1, poles=3, feeds="P", breaker_amps=100),))
    p = Panel("P", W208, spaces=12, circuits=(_c(1, 2_000.0), _c(3, 2_000.0)))
    return _project(top, p)


def test_best_slot_is_on_the_least_loaded_phase_and_totals_follow() -> None:
    project = _two_level()
    result = compute_project(project)
    pv = preview(project, result, AddedLoad("P", 1_000.0, Category.EQUIPMENT, 1, pf=1.0))
    assert pv.option.phases == ("C",)
    assert pv.option.slot == 5  # row 3 (phase C), left side, lowest slot number
    assert [c.tag for c in pv.changes] == ["P", "TOP", "UTIL"]
    for change in pv.changes:
        assert_close(change.demand_va_after - change.demand_va_before, 1_000.0, what=change.tag)
    # On the empty phase C the most-loaded phase (A, 2 000/120 = 16.7 A) still sets the design current.
    assert_close(pv.changes[0].design_amps_after, 2_000.0 / 120.0)
    assert_close(pv.changes[0].pct_after, pv.changes[0].pct_before)
    assert pv.circuit.breaker_amps == 15  # 1 000/120 = 8.3 A → 15 A, the smallest breaker
    # the preview is the engine's result of the project with the circuit added
    assert pv.result_after.to_json() == compute_project(pv.project_after).to_json()


def test_two_pole_load_avoids_the_heavy_phases() -> None:
    project = _project(Panel("P", W208, fed_from="UTIL", spaces=12, circuits=(_c(1, 3_000.0),)))
    pv = preview(project, compute_project(project), AddedLoad("P", 4_000.0, Category.EQUIPMENT, 2, pf=1.0))
    assert set(pv.option.phases) == {"B", "C"}
    # 4 000/207.85 = 19.2 A; continuous equipment? no → 20 A breaker
    assert pv.circuit.breaker_amps == 20


def test_continuous_load_breaker_at_125_percent() -> None:
    project = _project(Panel("P", W208, fed_from="UTIL", spaces=12))
    pv = preview(project, compute_project(project), AddedLoad("P", 2_000.0, Category.LIGHTING, 1))
    # lighting is continuous by default: 2 000/120 = 16.7 A × 1.25 = 20.8 A → 25 A
    assert pv.circuit.breaker_amps == 25


def test_high_leg_never_takes_a_line_to_neutral_load() -> None:
    project = _project(Panel("P", HIGH_LEG, fed_from="UTIL", spaces=12), system=HIGH_LEG)
    pv = preview(project, compute_project(project), AddedLoad("P", 500.0, Category.RECEPTACLE, 1))
    spec = SYSTEMS[HIGH_LEG]
    for option in pv.options:
        assert breaker_phases(spec, option.slot, 1) != ("B",)
    assert pv.option.phases != ("B",)


def test_a_space_entry_is_a_free_position() -> None:
    space = Circuit(slot=2, poles=0)
    project = _project(Panel("P", W208, fed_from="UTIL", spaces=2, circuits=(_c(1, 1_000.0), space)))
    pv = preview(project, compute_project(project), AddedLoad("P", 500.0, Category.EQUIPMENT, 1))
    assert pv.option.slot == 2 and pv.option.replaces_space
    assert pv.project_after.panel("P").circuit_at(2).poles == 1


def test_no_free_slot_is_refused_naming_the_spaces() -> None:
    project = _project(Panel("P", W208, fed_from="UTIL", spaces=2, circuits=(_c(1, 1_000.0), _c(2, 1_000.0))))
    with pytest.raises(ProjectFileError) as err:
        preview(project, compute_project(project), AddedLoad("P", 500.0, Category.EQUIPMENT, 1))
    assert err.value.problems[0].field == "spaces"
    assert "P" in str(err.value)


def test_a_chosen_slot_that_is_taken_is_refused() -> None:
    project = _two_level()
    with pytest.raises(ProjectFileError) as err:
        preview(project, compute_project(project), AddedLoad("P", 500.0, Category.EQUIPMENT, 1, slot=3))
    assert err.value.problems[0].slot == 3


def test_new_warnings_are_reported_for_the_ancestors() -> None:
    top = Panel(
        "TOP", W208, fed_from="UTIL", bus_amps=100, circuits=(Circuit(slot=1, poles=3, feeds="P", breaker_amps=100),)
    )
    p = Panel("P", W208, spaces=12, bus_amps=225)
    project = _project(top, p)
    # 36 000 VA balanced = 100 A per line on 208Y/120: pushes TOP's 100 A bus over.
    pv = preview(project, compute_project(project), AddedLoad("P", 40_000.0, Category.EQUIPMENT, 3))
    top_change = next(c for c in pv.changes if c.tag == "TOP")
    assert any(w.code.value == "bus-overload" for w in top_change.new_warnings)
