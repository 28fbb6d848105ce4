"""Headroom names the limit that binds first, on purpose-built (invented) projects.

Hand arithmetic: a balanced three-phase load of S VA on 208Y/120 (V_LL = √3 × 120 = 207.85 V in
the engine's arithmetic) draws S / (√3 × 207.85) = S / 360 A per line; 18 000 VA → 50.0 A.
Equipment loads count at 100 % and are noncontinuous (NFPA 70-2023 Article 220, from memory),
so the design current equals the line current.  Transformer full-load current
I = kVA × 1000 / (√3 × V_LL) (common practice; 15 kVA at 208 V → 41.64 A).  Conductor
ampacity: NFPA 70-2023 Table 310.16, 75 °C copper, 6 AWG = 65 A (from memory).
"""

from __future__ import annotations

import math
from dataclasses import replace

from server.calc.engine import compute_project
from server.calc.headroom import Limit, compute_headroom, phase_va_per_amp
from server.calc.model import Category, Circuit, Feeder, Panel, Project, ProjectInfo, Source, Status, Transformer
from server.calc.systems import SYSTEMS
from tests.helpers import assert_close

W208 = "208Y/120 3PH 4W"
W480 = "480Y/277 3PH 4W"
D480 = "480 3PH 3W"


def _load(slot: int, va: float, poles: int = 3) -> Circuit:
    return Circuit(slot=slot, poles=poles, category=Category.EQUIPMENT, va=va, pf=1.0, status=Status.NEW)


def _project(panel: Panel, *, transformers: tuple[Transformer, ...] = (), source_system: str = W208) -> Project:
    return Project(ProjectInfo("Headroom test"), (Source("UTIL", source_system),), transformers, (panel,))


def _panel(**kw) -> Panel:
    base = dict(
        tag="P",
        system=W208,
        fed_from="UTIL",
        bus_amps=225,
        feeder=Feeder(length_ft=0.0, size="3/0", ocpd_amps=200),
        circuits=(_load(1, 18_000.0),),
    )
    base.update(kw)
    return Panel(**base)


def _headroom(project: Project):
    return compute_headroom(project, compute_project(project))


def test_bus_bound() -> None:
    h = _headroom(_project(_panel(bus_amps=100)))["P"]
    assert h.binding == Limit.BUS
    for p in "ABC":
        assert_close(h.amps[p], 100.0 - 18_000.0 / 360.0, rel=1e-3, what=f"phase {p}")
    # kVA per phase = amps × 120 V (V_LL/√3) for a balanced three-phase load
    assert_close(h.kva["A"], h.amps["A"] * 120.0 / 1000.0, rel=1e-3)
    assert_close(h.balanced_kva, 3 * h.kva["A"])


def test_main_bound() -> None:
    h = _headroom(_project(_panel(main_amps=90)))["P"]
    assert h.binding == Limit.MAIN
    assert_close(h.min_amps, 40.0, rel=1e-3)


def test_feeder_conductor_bound() -> None:
    # 6 AWG Cu, 65 A at 75 °C, on a 70 A device (the next size up): the conductor binds.
    h = _headroom(_project(_panel(feeder=Feeder(length_ft=0.0, size="6", ocpd_amps=70))))["P"]
    assert h.binding == Limit.FEEDER
    assert_close(h.min_amps, 65.0 - 50.0, rel=1e-3)


def test_feeder_ocpd_bound() -> None:
    h = _headroom(_project(_panel(feeder=Feeder(length_ft=0.0, size="4", ocpd_amps=60))))["P"]
    assert h.binding == Limit.OCPD
    assert_close(h.min_amps, 10.0, rel=1e-3)


def test_transformer_bound_and_limits_the_panel_below() -> None:
    xf = Transformer("T", kva=15.0, primary=D480, secondary=W208, fed_from="UTIL", feeder=Feeder(length_ft=0.0))
    panel = _panel(fed_from="T", circuits=(_load(1, 9_000.0),))
    hs = _headroom(_project(panel, transformers=(xf,), source_system=W480))
    t = hs["T"]
    assert t.binding == Limit.TRANSFORMER
    fla = 15_000.0 / (math.sqrt(3) * 208.0)
    assert_close(fla, 41.64, rel=1e-3, what="hand arithmetic")
    assert_close(t.min_amps, fla - 25.0, rel=2e-3)
    p = hs["P"]
    assert p.binding == Limit.UPSTREAM
    assert p.binding_tag == "T"
    assert "transformer kVA" in p.binding_detail
    # Same per-phase kVA as the transformer (the panel is on its secondary, phase for phase).
    assert_close(p.kva["A"], t.kva["A"], rel=1e-9)


def test_spaces_bound() -> None:
    panel = _panel(spaces=2, circuits=(_load(1, 1_000.0, poles=1), _load(2, 1_000.0, poles=1)))
    h = _headroom(_project(panel))["P"]
    assert h.binding == Limit.SPACES
    assert h.poles_available == 0
    assert h.min_amps == 0.0 and h.balanced_kva == 0.0


def test_a_spare_breaker_is_room_for_a_new_circuit() -> None:
    spare = Circuit(slot=2, poles=1, category=Category.SPARE, status=Status.NEW)
    panel = _panel(spaces=2, circuits=(_load(1, 1_000.0, poles=1), spare))
    h = _headroom(_project(panel))["P"]
    assert h.poles_available == 1
    assert h.binding != Limit.SPACES


def test_voltage_drop_bound_and_the_headroom_reaches_the_limit() -> None:
    """Adding exactly the voltage-drop headroom as a balanced load brings the feeder drop to 3 %."""
    panel = _panel(feeder=Feeder(length_ft=600.0, size="3/0", ocpd_amps=200), circuits=(_load(1, 9_000.0),))
    project = _project(panel)
    result = compute_project(project)
    h = compute_headroom(project, result)["P"]
    assert h.binding == Limit.VOLTAGE_DROP
    before = result.panels["P"].feeder
    assert before is not None and before.voltage_drop_pct < 3.0
    added_va = h.min_amps * phase_va_per_amp(SYSTEMS[W208]) * 3
    grown = replace(panel, circuits=(*panel.circuits, _load(2, added_va)))
    after = compute_project(_project(grown)).panels["P"].feeder
    assert after is not None
    limit = project.project.vd_feeder_pct
    assert_close(after.voltage_drop_pct, limit, rel=1e-6, what="feeder drop after adding the headroom")


def test_overload_reports_zero_not_negative() -> None:
    h = _headroom(_project(_panel(bus_amps=40)))["P"]
    assert h.binding == Limit.BUS
    assert h.min_amps == 0.0
    bus = next(c for c in h.checks if c.limit == Limit.BUS)
    assert bus.min_amps < 0 and bus.used_pct > 100.0


def test_source_has_no_rating() -> None:
    h = _headroom(_project(_panel()))["UTIL"]
    assert h.binding == Limit.NONE
    assert math.isinf(h.min_amps)


def test_cumulative_voltage_drop_bound_through_two_feeders() -> None:
    """Two 600 ft 3/0 feeders in series, each at about 2.4 %: the 5 % total binds before either 3 %.

    Adding the headroom as a balanced load on P brings the cumulative drop at P to exactly 5 %
    (NEC 215.2(A)(2) Informational Note No. 2 recommendation; drops proportional to load).
    """
    top = Panel(
        "TOP",
        W208,
        fed_from="UTIL",
        feeder=Feeder(length_ft=600.0, size="3/0", ocpd_amps=200),
        circuits=(Circuit(slot=1, poles=3, feeds="P", breaker_amps=200),),
    )
    p = Panel("P", W208, feeder=Feeder(length_ft=600.0, size="3/0", ocpd_amps=200), circuits=(_load(1, 22_000.0),))
    project = Project(ProjectInfo("Headroom test"), (Source("UTIL", W208),), (), (top, p))
    result = compute_project(project)
    h = compute_headroom(project, result)["P"]
    assert h.binding == Limit.VOLTAGE_DROP and "total" in h.binding_detail
    added_va = h.min_amps * phase_va_per_amp(SYSTEMS[W208]) * 3
    grown = replace(p, circuits=(*p.circuits, _load(2, added_va)))
    after = compute_project(Project(project.project, project.sources, (), (top, grown))).panels["P"].feeder
    assert after is not None
    assert_close(after.cumulative_voltage_drop_pct, project.project.vd_total_pct, rel=1e-6)
