"""Properties of the currents and the roll-up that must hold for any input (hypothesis).

Facts of the trade (common practice): Kirchhoff's current law makes the line currents of a
3-wire circuit sum to zero; a balanced three-phase set returns nothing on the neutral; VA is
conserved as loads roll up to their feeders; constant-power currents at nominal voltage scale
linearly with the load.  Plus the engine's own contract: an incremental update equals a full
recompute — also with panels whose feeders are landed rotated (``feeder_rotation``).
"""

from __future__ import annotations

import json
import random
from dataclasses import replace

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from server.calc.engine import Calculator, compute_project
from server.calc.loads import circuit_currents
from server.calc.model import Category, Circuit, Panel, Project, ProjectInfo, Source, Status
from server.calc.projectfile import dump_project, parse_project, replace_panel, rotation_allowed
from server.calc.systems import SYSTEMS, slot_phase
from tests.benchmarks.generate import generate_project
from tests.helpers import assert_close

THREE_WIRE = ["480 3PH 3W", "240 3PH 3W", "600 3PH 3W"]
FOUR_WIRE = ["208Y/120 3PH 4W", "480Y/277 3PH 4W", "240/120 3PH 4W"]
PF = st.floats(min_value=0.5, max_value=1.0)
# Loads are empty or at least a milliwatt-scale VA: subnormal floats (5e-324 VA) underflow
# when averaged and say nothing about a panelboard.
VA = st.one_of(st.just(0.0), st.floats(min_value=1e-3, max_value=50_000.0, allow_nan=False))


@given(
    system=st.sampled_from(THREE_WIRE + FOUR_WIRE),
    loads=st.lists(st.tuples(st.integers(1, 20), st.sampled_from([2, 3]), VA, PF), max_size=15),
)
def test_line_to_line_and_three_phase_currents_sum_to_zero(system, loads) -> None:
    spec = SYSTEMS[system]
    total = 0j
    scale = 1.0
    for slot, poles, va, pf in loads:
        for i in circuit_currents(spec, slot, poles, va, pf).values():
            total += i
            scale += abs(i)
    assert abs(total) <= 1e-9 * scale


def _project(system: str, circuits: list[Circuit]) -> Project:
    return Project(
        ProjectInfo(name="property (invented)"),
        sources=(Source("S", system),),
        panels=(Panel("P", system, fed_from="S", spaces=84, circuits=tuple(circuits)),),
    )


@given(
    system=st.sampled_from(["208Y/120 3PH 4W", "480Y/277 3PH 4W"]),
    sets=st.lists(st.tuples(VA, PF), min_size=1, max_size=8),
)
def test_balanced_three_phase_sets_give_zero_neutral(system, sets) -> None:
    # Each set: the same 1-pole load on A, B and C (rows 1, 2, 3 of one side).
    circuits = []
    slot = 1
    for va, pf in sets:
        for k in range(3):
            circuits.append(Circuit(slot=slot + 2 * k, poles=1, category=Category.EQUIPMENT, va=va, pf=pf))
        slot += 6
    res = compute_project(_project(system, circuits)).panels["P"]
    biggest = max(res.line_amps.values())
    assert res.neutral_amps is not None and res.neutral_amps <= 1e-9 * max(biggest, 1.0)
    assert res.imbalance_pct <= 1e-9


CIRCUIT = st.tuples(
    st.sampled_from([1, 1, 1, 2, 3]),
    VA,
    PF,
    st.sampled_from(list(Category)),
    st.sampled_from([Status.NEW, Status.EXISTING, Status.FUTURE, Status.REMOVED]),
    st.sampled_from([0.0, 0.0, 30.0, 80.0]),
)


def _layout(rows) -> list[Circuit]:
    left, out = 1, []
    for poles, va, pf, cat, status, h3 in rows:
        out.append(Circuit(slot=left, poles=poles, category=cat, va=va, pf=pf, status=status, harmonic3_pct=h3))
        left += 2 * poles
    return out


@given(system=st.sampled_from(FOUR_WIRE + THREE_WIRE), rows=st.lists(CIRCUIT, max_size=12), k=st.floats(0.1, 10.0))
@settings(suppress_health_check=[HealthCheck.too_slow], deadline=None)
def test_scaling_all_loads_scales_currents_linearly(system, rows, k) -> None:
    spec = SYSTEMS[system]
    if not spec.has_neutral:
        rows = [(max(r[0], 2), *r[1:]) for r in rows]
    if spec.high_leg:
        rows = [r for r in rows if r[0] != 1]  # 1-pole rows may land on the high leg
    circuits = _layout(rows)
    base = compute_project(_project(system, circuits)).panels["P"]
    scaled = compute_project(_project(system, [replace(c, va=(c.va or 0.0) * k) for c in circuits])).panels["P"]
    for p in spec.phases:
        assert_close(scaled.line_amps[p], k * base.line_amps[p], rel=1e-9, abs_=1e-9)
        assert_close(scaled.line_amps_rms[p], k * base.line_amps_rms[p], rel=1e-9, abs_=1e-9)
        assert_close(scaled.connected_va[p], k * base.connected_va[p], rel=1e-9, abs_=1e-6)
    if base.neutral_amps is not None:
        assert_close(scaled.neutral_amps, k * base.neutral_amps, rel=1e-9, abs_=1e-9)
    assert_close(scaled.imbalance_pct, base.imbalance_pct, rel=1e-9, abs_=1e-9)


def _small(seed: int) -> Project:
    return generate_project(
        panels=11, sources=1, transformers_per_mdp=2, panels_per_transformer=2, circuits_per_panel=14, seed=seed
    )


@given(seed=st.integers(0, 10_000), include_future=st.booleans())
@settings(max_examples=40, deadline=None)
def test_connected_va_is_conserved_through_the_roll_up(seed, include_future) -> None:
    project = _small(seed)
    res = compute_project(project, include_future=include_future)

    def counts(c: Circuit) -> bool:
        return c.status != Status.REMOVED and (include_future or c.status != Status.FUTURE)

    for panel in project.panels:
        own = sum(c.va or 0.0 for c in panel.circuits if c.feeds is None and c.poles and counts(c))
        children = 0.0
        for c in panel.circuits:
            if c.feeds is None or not counts(c):
                continue
            if c.feeds in res.panels:
                children += res.panels[c.feeds].connected_va_total
            else:
                children += res.transformers[c.feeds].connected_kva * 1000.0  # includes loss_pct
        assert_close(res.panels[panel.tag].connected_va_total, own + children, rel=1e-9, abs_=1e-6, what=panel.tag)
    for t in project.transformers:
        below = sum(res.panels[p.tag].connected_va_total for p in project.panels if p.fed_from == t.tag)
        assert_close(res.transformers[t.tag].connected_kva * 1000.0, below * (1 + t.loss_pct / 100), rel=1e-9)
    for s in project.sources:
        below = sum(res.panels[p.tag].connected_va_total for p in project.panels if p.fed_from == s.tag)
        assert_close(res.sources[s.tag].connected_va, below, rel=1e-9)


def _with_rotations(project: Project, rotations: list[int]) -> Project:
    """``project`` with feeder rotations drawn from ``rotations`` on the panels that allow one."""
    panels = list(project.panels)
    allowed = [i for i, p in enumerate(panels) if rotation_allowed(p.system)]
    for i, r in zip(allowed, rotations, strict=False):
        panels[i] = replace(panels[i], feeder_rotation=r)
    rotated = replace(project, panels=tuple(panels))
    assert parse_project(dump_project(rotated)) == rotated  # the drawn rotations are all valid
    return rotated


@given(
    seed=st.integers(0, 10_000),
    edits=st.lists(st.tuples(st.integers(0, 10**6), VA, PF, CIRCUIT), min_size=1, max_size=6),
    rotations=st.lists(st.sampled_from([0, 1, 2]), max_size=11),
)
@settings(max_examples=30, deadline=None)
def test_incremental_equals_full(seed, edits, rotations) -> None:
    project = _with_rotations(_small(seed), rotations)
    calc = Calculator(project)
    for pick, va, pf, (_poles, _va, _pf, cat, status, h3) in edits:
        rng = random.Random(pick)
        panel = rng.choice(calc.project.panels)
        loads = [i for i, c in enumerate(panel.circuits) if c.feeds is None and c.poles > 0]
        circuits = list(panel.circuits)
        if loads:
            i = rng.choice(loads)
            circuits[i] = replace(circuits[i], va=va, pf=pf, category=cat, status=status, harmonic3_pct=h3)
        # Sometimes change a feeding breaker's rating too (the child's feeder must follow).
        feeds = [i for i, c in enumerate(circuits) if c.feeds is not None]
        if feeds and rng.random() < 0.3:
            i = rng.choice(feeds)
            circuits[i] = replace(circuits[i], breaker_amps=rng.choice([100, 200, 400]))
        edited = replace(panel, circuits=tuple(circuits))
        incremental = calc.update_panel(edited)
        project = replace_panel(project, edited)
        assert calc.project == project
        full = compute_project(project)
        assert incremental == full
        assert incremental.to_json() == full.to_json()
    # The edited project is still a valid project file.
    assert parse_project(dump_project(calc.project)) == calc.project


# --------------------------------------------------------------------------- random mixed-system projects

_LV = [name for name, spec in SYSTEMS.items() if not spec.medium_voltage]


def _random_circuits(rng: random.Random, system: str, count: int, feeds: list[tuple[str, int]]) -> tuple[list, int]:
    spec = SYSTEMS[system]
    out: list[dict] = []
    left, right = 1, 2
    for tag, poles in feeds:
        out.append({"slot": left, "poles": poles, "feeds": tag, "breaker_amps": rng.choice([None, 100, 400])})
        left += 2 * poles
    for _ in range(count):
        poles = min(rng.choice([1, 1, 2, 3]), len(spec.phases))
        if poles == 1 and not spec.has_neutral:
            poles = 2
        on_left = rng.random() < 0.5
        slot = left if on_left else right
        if poles == 1 and spec.high_leg and slot_phase(spec, slot) == spec.high_leg:
            continue
        if on_left:
            left += 2 * poles
        else:
            right += 2 * poles
        out.append(
            {
                "slot": slot,
                "poles": poles,
                "va": round(rng.uniform(0, 9000)),
                "pf": rng.choice([None, 0.8, 1.0]),
                "category": rng.choice([c.value for c in Category]),
                "harmonic3_pct": rng.choice([0, 0, 40]),
                "status": rng.choice(["new", "existing", "future", "removed"]),
                "breaker_amps": rng.choice([None, 20, 50]),
            }
        )
    return out, min(max(42, left + 2, right + 2), 200)


def _random_project(seed: int) -> Project:
    """Any system on the source, transformers of every winding pair, panels and sub-panels."""
    rng = random.Random(seed)
    source = rng.choice([*_LV, "12470Y/7200 3PH 4W", "4160 3PH 3W"])
    src = SYSTEMS[source]
    data: dict = {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "random (invented)", "include_future": rng.random() < 0.5},
        "sources": [{"tag": "S", "system": source, "fault_ka": rng.choice([None, 22, 65]), "x_over_r": 6}],
        "transformers": [],
        "panels": [],
    }
    outputs = [("S", source)]
    for i in range(rng.randint(0, 2)):
        primary = rng.choice([s for s in SYSTEMS if abs(SYSTEMS[s].v_ll - src.v_ll) < 0.5])
        secondary = rng.choice(_LV)
        p_n, s_n = len(SYSTEMS[primary].phases), len(SYSTEMS[secondary].phases)
        if (s_n == 3 and p_n < 3) or (p_n == 3 and len(src.phases) < 3):
            continue
        data["transformers"].append(
            {
                "tag": f"T{i}",
                "kva": rng.choice([15, 45, 75, 150]),
                "primary": primary,
                "secondary": secondary,
                "fed_from": "S",
                "loss_pct": rng.choice([0, 2]),
                "feeder": {"length_ft": rng.choice([0, 50])},
            }
        )
        outputs.append((f"T{i}", secondary))
    k = 0
    for parent, system in outputs:
        for _ in range(rng.randint(1, 2)):
            tag, sub = f"P{k}", f"P{k + 1}"
            k += 2
            subs = [(sub, len(SYSTEMS[system].phases))] if rng.random() < 0.5 else []
            circuits, spaces = _random_circuits(rng, system, rng.randint(0, 10), subs)
            feeder = {"length_ft": rng.choice([0, 30, 200])}
            rotatable = rotation_allowed(system)
            data["panels"].append(
                {
                    "tag": tag,
                    "system": system,
                    "fed_from": parent,
                    "spaces": spaces,
                    "circuits": circuits,
                    "feeder": feeder,
                    "feeder_rotation": rng.choice([0, 1, 2]) if rotatable else 0,
                }
            )
            if subs:
                circuits, spaces = _random_circuits(rng, system, rng.randint(0, 10), [])
                data["panels"].append(
                    {
                        "tag": sub,
                        "system": system,
                        "spaces": spaces,
                        "circuits": circuits,
                        "feeder_rotation": rng.choice([0, 1, 2]) if rotatable else 0,
                    }
                )
    return parse_project(data)


@given(seed=st.integers(0, 10**9), edits=st.lists(st.tuples(st.integers(0, 10**6), VA), max_size=4))
@settings(max_examples=60, deadline=None)
def test_any_valid_project_computes_and_incremental_matches(seed, edits) -> None:
    project = _random_project(seed)
    calc = Calculator(project)
    json.dumps(calc.result().to_json(), allow_nan=False)
    for pick, va in edits:
        rng = random.Random(pick)
        panel = rng.choice(project.panels)
        loads = [i for i, c in enumerate(panel.circuits) if c.feeds is None and c.poles > 0]
        if not loads:
            continue
        circuits = list(panel.circuits)
        i = rng.choice(loads)
        circuits[i] = replace(circuits[i], va=va)
        edited = replace(panel, circuits=tuple(circuits))
        project = replace_panel(project, edited)
        assert calc.update_panel(edited) == compute_project(project)
    # Connected VA is conserved at every source whatever the systems and windings.
    res = calc.result()
    for s in project.sources:
        below = sum(res.panels[p.tag].connected_va_total for p in project.panels if p.fed_from == s.tag)
        below += sum(t.connected_kva * 1000 for t in res.transformers.values() if t.fed_from == s.tag)
        assert_close(res.sources[s.tag].connected_va, below, rel=1e-9, abs_=1e-6)
