"""Tests of the phase balancer (server.calc.balance and server.calc.balance_milp).

The reference is an exhaustive search written here from the project-file rules alone (slot
geometry of server.calc.systems, NEC-style trade convention for phase VA, phasor neutral
current), independent of the balancer's model: every arrangement of the movable breakers is
enumerated and scored.

Sources: the phase-VA trade convention (1-pole on its phase, 2-pole half on each, 3-pole a third
on each) and "no line-to-neutral load on the high leg" are common practice (the latter also
NFPA 70-2023 110.15 marking of the high leg, from memory); the neutral current of a grounded
wye or split-phase system as the phasor sum of the line-to-neutral currents is circuit theory
(Kirchhoff's current law at the neutral point).
"""

from __future__ import annotations

import cmath
import itertools
import math
import random
from dataclasses import replace

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from server.calc.balance import (
    NEUTRAL_DIRECTIONS,
    BalanceOptions,
    Move,
    Objective,
    Solver,
    apply_moves,
    assignment_lower_bound,
    balance_panel,
    balance_panel_in_project,
    balance_transformer,
    best_rotations,
    build_model,
    evaluate,
    inverse_moves,
    panel_loading,
    phase_va_lower_bound,
    rotate_phase_va,
)
from server.calc.engine import compute_project
from server.calc.errors import ProjectFileError
from server.calc.model import Circuit, Panel, Status
from server.calc.projectfile import check_panel, dump_project, load_project_file, parse_project, replace_panel
from server.calc.systems import SYSTEMS, breaker_phases, breaker_slots, slot_phase, slot_side
from tests.helpers import DEMO_FILE, assert_close

# --------------------------------------------------------------------------- exhaustive reference


def _counts(c: Circuit, include_future: bool) -> bool:
    if c.status == Status.REMOVED:
        return False
    return include_future or c.status != Status.FUTURE


def _va(c: Circuit, feeds_va: dict[str, float], include_future: bool = False) -> float:
    if c.poles == 0 or not _counts(c, include_future):
        return 0.0
    if c.feeds:
        return feeds_va.get(c.feeds, 0.0)
    return c.va or 0.0


def _contribution(
    panel: Panel, c: Circuit, start: int, feeds_va: dict[str, float]
) -> tuple[tuple[float, ...], complex]:
    """Phase VA (system order) and neutral phasor of circuit ``c`` placed at ``start``."""
    spec = SYSTEMS[panel.system]
    va = _va(c, feeds_va)
    phases = [slot_phase(spec, x) for x in breaker_slots(start, c.poles)]
    loads = tuple(sum(va / c.poles for q in phases if q == p) for p in spec.phases)
    neutral = 0j
    if c.poles == 1 and spec.has_neutral and va:
        v = spec.phase_voltage(phases[0])
        neutral = cmath.rect(va / abs(v), cmath.phase(v) - math.acos(c.effective_pf))
    return loads, neutral


def exhaustive(panel: Panel, opts: BalanceOptions, feeds_va: dict[str, float] | None = None):
    """Every feasible arrangement's outcome: list of (max phase VA, neutral A, moved breakers).

    Depth-first over the movable breakers, each tried at every feasible first slot; identical
    partial outcomes for the same set of used slots are merged (memoised), which keeps the
    search exhaustive and fast enough for ten breakers.
    """
    feeds_va = feeds_va or {}
    spec = SYSTEMS[panel.system]
    movable = [
        i
        for i, c in enumerate(panel.circuits)
        if c.poles > 0 and not c.locked and c.feeds is None and len(spec.phases) > 1
    ]
    fixed_slots: set[int] = set()
    fixed_loads = [0.0] * len(spec.phases)
    fixed_neutral = 0j
    for i, c in enumerate(panel.circuits):
        if i in movable:
            continue
        if c.poles == 0:
            if not opts.allow_spaces:
                fixed_slots.add(c.slot)
            continue
        fixed_slots.update(breaker_slots(c.slot, c.poles))
        loads, neutral = _contribution(panel, c, c.slot, feeds_va)
        fixed_loads = [a + b for a, b in zip(fixed_loads, loads, strict=True)]
        fixed_neutral += neutral
    if opts.allow_spaces:
        region = {s for s in range(1, panel.spaces + 1) if s not in fixed_slots}
    else:
        region = {s for i in movable for s in breaker_slots(panel.circuits[i].slot, panel.circuits[i].poles)}

    def starts_for(c: Circuit) -> list[int]:
        res = []
        for s in sorted(region):
            cover = breaker_slots(s, c.poles)
            if any(x not in region for x in cover):
                continue
            if opts.keep_sides and slot_side(s) != slot_side(c.slot):
                continue
            if c.poles == 1 and spec.high_leg and slot_phase(spec, s) == spec.high_leg:
                continue
            res.append(s)
        return res

    choices = []
    for i in movable:
        c = panel.circuits[i]
        row = []
        for s in starts_for(c):
            mask = 0
            for x in breaker_slots(s, c.poles):
                mask |= 1 << x
            loads, neutral = _contribution(panel, c, s, feeds_va)
            row.append((mask, loads, neutral, int(s != c.slot)))
        choices.append(row)
    memo: dict[tuple[int, int], set] = {}

    def rec(k: int, used: int) -> set:
        if k == len(choices):
            return {((0.0,) * len(spec.phases), 0j, 0)}
        key = (k, used)
        if key in memo:
            return memo[key]
        out = set()
        for mask, loads, neutral, moved in choices[k]:
            if mask & used:
                continue
            for rest_loads, rest_neutral, rest_moved in rec(k + 1, used | mask):
                total = tuple(round(a + b, 6) for a, b in zip(loads, rest_loads, strict=True))
                n = complex(round((neutral + rest_neutral).real, 9), round((neutral + rest_neutral).imag, 9))
                out.add((total, n, moved + rest_moved))
        memo[key] = out
        return out

    results = []
    for loads, neutral, moved in rec(0, 0):
        total = [a + b for a, b in zip(loads, fixed_loads, strict=True)]
        results.append((max(total), abs(neutral + fixed_neutral), moved))
    return results


def best_of(arrangements, objective: Objective, max_moves: int | None = None) -> float:
    pool = [a for a in arrangements if max_moves is None or a[2] <= max_moves]
    return min(a[1] if objective == Objective.NEUTRAL else a[0] for a in pool)


def fewest_moves_within(arrangements, objective: Objective, cap: float, max_moves: int | None = None) -> int:
    pool = [a for a in arrangements if max_moves is None or a[2] <= max_moves]
    return min(a[2] for a in pool if (a[1] if objective == Objective.NEUTRAL else a[0]) <= cap)


# --------------------------------------------------------------------------- random panels


def random_panel(rng: random.Random, *, max_movable: int = 7, max_spaces: int = 14) -> tuple[Panel, dict[str, float]]:
    system = rng.choice(
        ["208Y/120 3PH 4W", "480Y/277 3PH 4W", "240/120 3PH 4W", "120/240 1PH 3W", "480 3PH 3W", "208Y/120 3PH 4W"]
    )
    spec = SYSTEMS[system]
    n = len(spec.phases)
    spaces = rng.randrange(6, max_spaces + 1)
    taken: set[int] = set()
    circuits: list[Circuit] = []
    feeds_va: dict[str, float] = {}
    movable = 0
    for slot in range(1, spaces + 1):
        if slot in taken or rng.random() < 0.2:
            continue
        poles = rng.choice([1, 1, 1, 2, 3][: 5 if n == 3 else 4])
        if not spec.has_neutral and poles == 1:
            poles = 2
        if poles > n:
            poles = n
        if poles == 1 and spec.high_leg and slot_phase(spec, slot) == spec.high_leg:
            poles = 2
        cover = breaker_slots(slot, poles)
        if any(x in taken or x > spaces for x in cover):
            continue
        r = rng.random()
        if r < 0.08:
            circuits.append(Circuit(slot=slot, poles=0, description="SPACE"))
            taken.add(slot)
            continue
        taken.update(cover)
        if r < 0.16 and poles >= 2:
            tag = f"SUB{slot}"
            feeds_va[tag] = float(rng.randrange(1, 40) * 250)
            circuits.append(Circuit(slot=slot, poles=poles, feeds=tag))
            continue
        locked = rng.random() < 0.15
        if not locked:
            if movable >= max_movable:
                locked = True
            else:
                movable += 1
        status = rng.choice([Status.EXISTING, Status.NEW, Status.NEW, Status.FUTURE, Status.REMOVED])
        circuits.append(
            Circuit(
                slot=slot,
                poles=poles,
                va=float(rng.randrange(0, 60) * 50),
                pf=rng.choice([None, 0.8, 0.95, 1.0]),
                status=status,
                locked=locked,
            )
        )
    return Panel(tag="RP-1", system=system, spaces=spaces, circuits=tuple(circuits)), feeds_va


def _valid(panel: Panel) -> list:
    problems: list = []
    check_panel(panel, problems)
    return problems


# --------------------------------------------------------------------------- fixed examples


def _p(system: str, spaces: int, *rows: tuple) -> Panel:
    """rows: (slot, poles, va[, locked])."""
    circuits = []
    for r in rows:
        slot, poles, va = r[:3]
        locked = r[3] if len(r) > 3 else False
        circuits.append(Circuit(slot=slot, poles=poles, va=float(va) if poles else None, locked=locked))
    return Panel(tag="LP-T", system=system, spaces=spaces, circuits=tuple(circuits))


def test_trade_convention_phase_va() -> None:
    # 208Y/120: slots 1,2 -> A; 3,4 -> B; 5,6 -> C (common practice row lettering)
    panel = _p("208Y/120 3PH 4W", 12, (1, 1, 1200), (4, 2, 3000), (7, 3, 9000))
    load = panel_loading(panel)
    # 1-pole 1200 on A; 2-pole at 4 covers B (4) and C (6): 1500 each; 3-pole 3000 each on A, B, C
    assert load.phase_va == {"A": 4200.0, "B": 4500.0, "C": 4500.0}


def test_neutral_current_phasor() -> None:
    # Three equal unity-pf loads on A, B, C of a wye cancel in the neutral (KCL, 120° apart).
    panel = _p("208Y/120 3PH 4W", 6, (1, 1, 1200), (3, 1, 1200), (5, 1, 1200))
    panel = replace(panel, circuits=tuple(replace(c, pf=1.0) for c in panel.circuits))
    assert panel_loading(panel).neutral_amps == pytest.approx(0.0, abs=1e-9)
    # One 1200 VA load at 120 V: the neutral carries the whole 10 A.
    one = _p("208Y/120 3PH 4W", 6, (1, 1, 1200))
    assert_close(panel_loading(one).neutral_amps or 0.0, 10.0, what="single load neutral")
    # Split-phase: 1200 VA on A and 600 VA on B (unity pf) -> |10 − 5| = 5 A.
    split = _p("120/240 1PH 3W", 4, (1, 1, 1200), (3, 1, 600))
    split = replace(split, circuits=tuple(replace(c, pf=1.0) for c in split.circuits))
    assert_close(panel_loading(split).neutral_amps or 0.0, 5.0, what="split-phase neutral")
    # 3-wire delta has no neutral
    assert panel_loading(_p("480 3PH 3W", 6, (1, 2, 5000))).neutral_amps is None


def test_obvious_case_is_balanced_with_one_swap() -> None:
    # A carries 2000 + 2000; B 500 + 500; C 1000 + 1000.  Swapping one A and one B breaker gives 2500 / 2500 / 2000.
    panel = _p("208Y/120 3PH 4W", 6, (1, 1, 2000), (2, 1, 2000), (3, 1, 500), (4, 1, 500), (5, 1, 1000), (6, 1, 1000))
    prop = balance_panel(panel)
    assert prop.before.max_phase_va == 4000.0
    assert prop.after.max_phase_va == 2500.0
    assert prop.breaker_moves == 2
    assert prop.lower_bound_va <= 2500.0
    assert prop.proven_optimal


def test_locked_and_feeds_stay_put() -> None:
    panel = Panel(
        tag="LP-L",
        system="208Y/120 3PH 4W",
        spaces=12,
        circuits=(
            Circuit(slot=1, poles=1, va=3000.0, locked=True),
            Circuit(slot=2, poles=3, feeds="SUB"),
            Circuit(slot=3, poles=1, va=2000.0),
            Circuit(slot=5, poles=1, va=100.0),
            Circuit(slot=7, poles=1, va=2500.0),
            Circuit(slot=9, poles=1, va=400.0),
        ),
    )
    prop = balance_panel(panel, feeds_va={"SUB": 9000.0})
    assert prop.panel.circuit_at(1) == panel.circuit_at(1)
    assert prop.panel.circuit_at(2) == panel.circuit_at(2)
    assert all(m.from_slot not in (1, 2) for m in prop.moves)
    # the sub-feed's 9000 VA counts a third on each phase
    assert sum(prop.before.phase_va.values()) == pytest.approx(3000 + 9000 + 2000 + 100 + 2500 + 400)


def test_high_leg_keeps_one_pole_off_b() -> None:
    # 240/120 3PH 4W: rows 2 and 5 (slots 3, 4, 9, 10) are the high leg B.
    panel = _p(
        "240/120 3PH 4W",
        12,
        (1, 1, 1800),
        (2, 1, 1700),
        (3, 2, 400),
        (4, 2, 600),
        (7, 1, 1500),
        (8, 1, 1600),
        (9, 2, 800),
        (12, 1, 300),
    )
    assert _valid(panel) == []
    spec = SYSTEMS[panel.system]
    for allow in (False, True):
        prop = balance_panel(panel, BalanceOptions(allow_spaces=allow))
        assert _valid(prop.panel) == []
        for c in prop.panel.circuits:
            if c.poles == 1:
                assert breaker_phases(spec, c.slot, 1)[0] != "B"


def test_bad_panel_is_refused_with_tag_and_slot() -> None:
    panel = _p("208Y/120 3PH 4W", 4, (1, 3, 1000))  # needs slot 5
    with pytest.raises(ProjectFileError) as info:
        balance_panel(panel)
    assert "LP-T" in str(info.value) and "slot 1" in str(info.value)


def test_apply_moves_refuses_bad_moves() -> None:
    panel = _p("208Y/120 3PH 4W", 6, (1, 1, 100), (2, 1, 200), (3, 2, 300))
    with pytest.raises(ProjectFileError, match="no circuit starts at slot 4"):
        apply_moves(panel, [Move(4, 6)])
    with pytest.raises(ProjectFileError, match="overlap"):
        apply_moves(panel, [Move(1, 5)])  # the 2-pole at 3 takes 3 and 5
    with pytest.raises(ProjectFileError, match="two moves land on slot 2"):
        apply_moves(panel, [Move(1, 2), Move(3, 2)])
    # a swap applied at once needs no free slot
    swapped = apply_moves(panel, [Move(1, 2), Move(2, 1)])
    assert swapped.circuit_at(1).va == 200.0 and swapped.circuit_at(2).va == 100.0


def test_demo_panels_round_trip_and_improve() -> None:
    project = load_project_file(DEMO_FILE)
    for panel in project.panels:
        for objective in Objective:
            prop = balance_panel_in_project(project, panel.tag, BalanceOptions(objective=objective, time_limit_s=1.0))
            assert _valid(prop.panel) == []
            assert apply_moves(prop.panel, inverse_moves(prop.moves)) == panel
            if objective == Objective.MAX_PHASE:
                assert prop.after.max_phase_va <= prop.before.max_phase_va + 1e-6
                assert prop.lower_bound_va <= prop.after.max_phase_va + 1e-6
            else:
                assert (prop.after.neutral_amps or 0) <= (prop.before.neutral_amps or 0) + 1e-6


def test_unknown_panel_tag_names_it() -> None:
    project = load_project_file(DEMO_FILE)
    with pytest.raises(ProjectFileError, match="no panel with tag 'NOPE'"):
        balance_panel_in_project(project, "NOPE")


# --------------------------------------------------------------------------- exhaustive comparisons

SMALL = [
    _p(
        "208Y/120 3PH 4W",
        12,
        (1, 1, 1800),
        (2, 1, 1620),
        (3, 1, 360),
        (4, 2, 2400),
        (5, 1, 900),
        (7, 1, 1500),
        (8, 1, 700, True),
        (9, 1, 1100),
        (10, 1, 200, True),
    ),
    _p(
        "480Y/277 3PH 4W",
        14,
        (1, 3, 9000),
        (2, 1, 2770),
        (4, 1, 1500),
        (6, 2, 4000),
        (7, 1, 3000),
        (12, 1, 800, True),
        (9, 1, 2100),
        (11, 1, 600, True),
        (14, 1, 1200),
    ),
    _p(
        "120/240 1PH 3W",
        12,
        (1, 1, 1500),
        (2, 1, 1440),
        (3, 2, 4500),
        (4, 1, 1800),
        (6, 1, 1200),
        (7, 1, 900),
        (8, 1, 360, True),
        (9, 1, 1000),
    ),
    _p(
        "240/120 3PH 4W",
        14,
        (1, 1, 1800),
        (2, 1, 1700),
        (3, 2, 400),
        (4, 2, 600),
        (7, 1, 1500),
        (8, 1, 1600),
        (9, 2, 800),
        (12, 1, 1000, True),
        (13, 1, 900),
    ),
    _p("480 3PH 3W", 16, (1, 2, 5000), (2, 2, 3000), (5, 2, 4000), (6, 3, 9000), (9, 2, 2500), (13, 2, 1500)),
]


@pytest.mark.parametrize("panel", SMALL, ids=[p.system for p in SMALL])
@pytest.mark.parametrize("allow_spaces", [False, True])
@pytest.mark.parametrize("keep_sides", [False, True])
def test_small_panels_match_exhaustive_optimum(panel: Panel, allow_spaces: bool, keep_sides: bool) -> None:
    assert _valid(panel) == []
    opts = BalanceOptions(allow_spaces=allow_spaces, keep_sides=keep_sides)
    arrangements = exhaustive(panel, opts)
    optimum = best_of(arrangements, Objective.MAX_PHASE)
    prop = balance_panel(panel, opts)
    assert_close(prop.after.max_phase_va, optimum, rel=1e-9, what="achieved vs exhaustive optimum")
    assert prop.lower_bound_va <= optimum + 1e-6
    # fewest moves among the optimal arrangements
    assert prop.breaker_moves == fewest_moves_within(arrangements, Objective.MAX_PHASE, optimum + 1e-6)
    assert prop.moves_minimal


@pytest.mark.parametrize("panel", SMALL[:3], ids=[p.system for p in SMALL[:3]])
@pytest.mark.parametrize("max_moves", [0, 1, 2, 3])
def test_max_moves_respected_and_optimal_under_the_cap(panel: Panel, max_moves: int) -> None:
    opts = BalanceOptions(max_moves=max_moves)
    arrangements = exhaustive(panel, opts)
    prop = balance_panel(panel, opts)
    assert prop.breaker_moves <= max_moves
    assert_close(prop.after.max_phase_va, best_of(arrangements, Objective.MAX_PHASE, max_moves), rel=1e-9)


@pytest.mark.parametrize("panel", SMALL[:3], ids=[p.system for p in SMALL[:3]])
@pytest.mark.parametrize("tolerance_pct", [1.0, 5.0, 15.0])
def test_moves_minimal_within_tolerance(panel: Panel, tolerance_pct: float) -> None:
    opts = BalanceOptions(tolerance_pct=tolerance_pct)
    arrangements = exhaustive(panel, opts)
    optimum = best_of(arrangements, Objective.MAX_PHASE)
    cap = optimum * (1 + tolerance_pct / 100)
    prop = balance_panel(panel, opts)
    assert prop.after.max_phase_va <= cap + 1e-6
    assert prop.breaker_moves == fewest_moves_within(arrangements, Objective.MAX_PHASE, cap + 1e-6)


@pytest.mark.parametrize("panel", [p for p in SMALL if SYSTEMS[p.system].has_neutral], ids=lambda p: p.system)
def test_neutral_objective_reduces_neutral_current(panel: Panel) -> None:
    opts = BalanceOptions(objective=Objective.NEUTRAL, allow_spaces=True)
    arrangements = exhaustive(panel, opts)
    least = best_of(arrangements, Objective.NEUTRAL)
    prop = balance_panel(panel, opts)
    assert (prop.after.neutral_amps or 0) <= (prop.before.neutral_amps or 0) + 1e-9
    # the linear programme measures |I_N| by a 24-sided polygon: within 1/cos(π/24) of the least
    assert (prop.after.neutral_amps or 0) <= least / math.cos(math.pi / NEUTRAL_DIRECTIONS) + 1e-6
    assert (prop.lower_bound_neutral_amps or 0) <= least + 1e-6


def test_neutral_objective_on_a_lopsided_panel() -> None:
    # everything on phase A: the neutral carries it all; spreading the loads cancels most of it
    panel = _p(
        "208Y/120 3PH 4W",
        12,
        (1, 1, 1200),
        (2, 1, 1200),
        (7, 1, 1200),
        (8, 1, 1200),
        (3, 1, 0),
        (4, 1, 0),
        (5, 1, 0),
        (6, 1, 0),
    )
    prop = balance_panel(panel, BalanceOptions(objective=Objective.NEUTRAL))
    assert_close(prop.before.neutral_amps or 0, 40.0)
    assert (prop.after.neutral_amps or 0) < 10.5  # best: 2 on one phase, 1 and 1 on the others -> 10 A


# --------------------------------------------------------------------------- properties


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**32 - 1), allow=st.booleans(), sides=st.booleans(), objective=st.sampled_from(list(Objective))
)
def test_constraints_never_violated(seed: int, allow: bool, sides: bool, objective: Objective) -> None:
    rng = random.Random(seed)
    panel, feeds = random_panel(rng, max_movable=10, max_spaces=24)
    assert _valid(panel) == []
    opts = BalanceOptions(
        objective=objective, allow_spaces=allow, keep_sides=sides, max_moves=rng.choice([None, 0, 2, 5])
    )
    prop = balance_panel(panel, opts, feeds_va=feeds)
    new = prop.panel
    assert _valid(new) == []  # no overlap, within spaces, nothing on the high leg, no 1-pole on delta
    assert len(new.circuits) == len(panel.circuits)
    spec = SYSTEMS[panel.system]
    for old_c, new_c in zip(panel.circuits, new.circuits, strict=True):
        assert replace(new_c, slot=old_c.slot) == old_c  # only slots change
        if old_c.locked or old_c.feeds:
            assert new_c.slot == old_c.slot
        if sides and new_c.poles > 0:
            assert slot_side(new_c.slot) == slot_side(old_c.slot)
        if new_c.poles == 1 and spec.high_leg:
            assert slot_phase(spec, new_c.slot) != spec.high_leg
    if not allow:

        def occupied(p: Panel) -> set[int]:
            return {s for c in p.circuits if c.poles for s in breaker_slots(c.slot, c.poles)}

        assert occupied(new) == occupied(panel)
        assert {c.slot for c in new.circuits if c.poles == 0} == {c.slot for c in panel.circuits if c.poles == 0}
    if opts.max_moves is not None:
        assert prop.breaker_moves <= opts.max_moves
    # undo restores the original exactly
    assert apply_moves(new, inverse_moves(prop.moves)) == panel
    assert apply_moves(panel, prop.moves) == new
    # never worse than the input
    if objective == Objective.MAX_PHASE:
        assert prop.after.max_phase_va <= prop.before.max_phase_va + 1e-6
    else:
        assert (prop.after.neutral_amps or 0) <= (prop.before.neutral_amps or 0) + 1e-6


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 2**32 - 1), allow=st.booleans(), sides=st.booleans())
def test_random_small_panels_match_exhaustive(seed: int, allow: bool, sides: bool) -> None:
    rng = random.Random(seed)
    panel, feeds = random_panel(rng, max_movable=6, max_spaces=12)
    opts = BalanceOptions(allow_spaces=allow, keep_sides=sides)
    arrangements = exhaustive(panel, opts, feeds)
    optimum = best_of(arrangements, Objective.MAX_PHASE)
    model = build_model(panel, opts, False, feeds)
    assert phase_va_lower_bound(model) <= optimum + 1e-6  # the bound never exceeds the optimum
    relaxed = assignment_lower_bound(model, optimum + 1000.0)
    assert relaxed is None or relaxed <= optimum + 1e-6
    prop = balance_panel(panel, opts, feeds_va=feeds)
    assert prop.lower_bound_va <= optimum + 1e-6
    assert_close(prop.after.max_phase_va, optimum, rel=1e-9, abs_=1e-6, what=f"seed {seed}")
    assert prop.breaker_moves == fewest_moves_within(arrangements, Objective.MAX_PHASE, optimum + 1e-6)


def test_heuristic_alone_is_valid_and_never_worse() -> None:
    rng = random.Random(7)
    for _ in range(30):
        panel, feeds = random_panel(rng, max_movable=10, max_spaces=24)
        prop = balance_panel(panel, BalanceOptions(solver=Solver.HEURISTIC, allow_spaces=True), feeds_va=feeds)
        assert prop.solver == "heuristic"
        assert _valid(prop.panel) == []
        assert prop.after.max_phase_va <= prop.before.max_phase_va + 1e-6
        assert prop.lower_bound_va <= prop.after.max_phase_va + 1e-6


# --------------------------------------------------------------------------- transformer rotation


def test_rotate_phase_va_is_cyclic() -> None:
    load = {"A": 1.0, "B": 2.0, "C": 3.0}
    assert rotate_phase_va(load, 0) == load
    assert rotate_phase_va(load, 1) == {"A": 3.0, "B": 1.0, "C": 2.0}  # panel A lands on B
    assert rotate_phase_va(rotate_phase_va(load, 1), 2) == load


def test_best_rotations_match_brute_force() -> None:
    rng = random.Random(11)
    for _ in range(25):
        k = rng.randrange(1, 6)
        loads = [{p: float(rng.randrange(0, 50) * 100) for p in "ABC"} for _ in range(k)]
        rotatable = [rng.random() < 0.8 for _ in range(k)]
        rots, value = best_rotations(loads, rotatable)
        brute = math.inf
        for combo in itertools.product(range(3), repeat=k):
            if any(r and not ok for r, ok in zip(combo, rotatable, strict=True)):
                continue
            acc = {"A": 0.0, "B": 0.0, "C": 0.0}
            for load, r in zip(loads, combo, strict=True):
                for p, x in rotate_phase_va(load, r).items():
                    acc[p] += x
            brute = min(brute, max(acc.values()))
        assert value == pytest.approx(brute)
        assert all(r == 0 for r, ok in zip(rots, rotatable, strict=True) if not ok)


def _xfmr_project(rng: random.Random, sub_count: int):
    """A transformer feeding a distribution panel whose 3-pole breakers feed ``sub_count`` panels."""
    from server.calc.projectfile import parse_project

    def loads(n: int, start: int = 1) -> list[dict]:
        out = []
        for i in range(n):
            out.append({"slot": start + i, "poles": 1, "va": rng.randrange(2, 30) * 60, "locked": rng.random() < 0.5})
        return out

    panels = [
        {
            "tag": "DP",
            "system": "208Y/120 3PH 4W",
            "fed_from": "TX",
            "spaces": 24,
            "circuits": [{"slot": 1 + 6 * (i // 2) + (i % 2), "poles": 3, "feeds": f"P{i}"} for i in range(sub_count)]
            + loads(3, 19),
        }
    ]
    for i in range(sub_count):
        panels.append(
            {"tag": f"P{i}", "system": "208Y/120 3PH 4W", "spaces": 12, "circuits": loads(rng.randrange(2, 7))}
        )
    data = {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "Rotation test"},
        "sources": [{"tag": "UTIL", "system": "480Y/277 3PH 4W"}],
        "transformers": [
            {"tag": "TX", "kva": 75, "primary": "480 3PH 3W", "secondary": "208Y/120 3PH 4W", "fed_from": "UTIL"}
        ],
        "panels": panels,
    }
    return parse_project(data)


@pytest.mark.parametrize("seed", range(6))
def test_transformer_rotation_matches_brute_force(seed: int) -> None:
    rng = random.Random(seed)
    project = _xfmr_project(rng, sub_count=3)
    prop = balance_transformer(project, "TX")
    # reference: balanced panels' own loads, every absolute rotation of each panel
    own = [r.own_phase_va_after for r in prop.rotations]
    brute = math.inf
    for combo in itertools.product(range(3), repeat=len(own)):
        acc = {"A": 0.0, "B": 0.0, "C": 0.0}
        for load, r in zip(own, combo, strict=True):
            for p, x in rotate_phase_va(load, r).items():
                acc[p] += x
        brute = min(brute, max(acc.values()))
    assert max(prop.after_phase_va.values()) == pytest.approx(brute)
    assert max(prop.after_phase_va.values()) <= max(prop.before_phase_va.values()) + 1e-6
    # the total is conserved (rotation and moves only relabel)
    assert sum(prop.after_phase_va.values()) == pytest.approx(sum(prop.before_phase_va.values()))
    # feeder rotation is absolute minus the feeding panel's absolute rotation
    absolute = {r.panel_tag: r.rotation for r in prop.rotations}
    for r in prop.rotations:
        parent = "DP" if r.panel_tag != "DP" else None
        assert r.feeder_rotation == (r.rotation - (absolute[parent] if parent else 0)) % 3


def test_transformer_rotation_skips_high_leg() -> None:
    project = load_project_file(DEMO_FILE)
    high_leg = [t for t in project.transformers if SYSTEMS[t.secondary].high_leg]
    if not high_leg:
        pytest.skip("demo has no high-leg transformer")
    prop = balance_transformer(project, high_leg[0].tag)
    assert all(r.rotation == 0 and not r.rotatable for r in prop.rotations)


def test_fewest_moves_option_proves_the_move_count() -> None:
    project = load_project_file(DEMO_FILE)
    panel = max(project.panels, key=lambda p: sum(c.poles == 1 for c in p.circuits))
    quick = balance_panel_in_project(project, panel.tag)
    exact = balance_panel_in_project(project, panel.tag, BalanceOptions(fewest_moves=True))
    assert exact.moves_minimal
    assert exact.breaker_moves <= quick.breaker_moves
    assert exact.after.max_phase_va <= quick.after.max_phase_va * (1 + 1e-9) + 1e-6


def test_future_loads_count_only_when_included() -> None:
    panel = Panel(
        tag="LP-F",
        system="208Y/120 3PH 4W",
        spaces=6,
        circuits=(
            Circuit(slot=1, poles=1, va=1000.0),
            Circuit(slot=3, poles=1, va=1000.0, status=Status.FUTURE),
            Circuit(slot=5, poles=1, va=1000.0, status=Status.REMOVED),
        ),
    )
    assert panel_loading(panel).phase_va == {"A": 1000.0, "B": 0.0, "C": 0.0}
    assert panel_loading(panel, include_future=True).phase_va == {"A": 1000.0, "B": 1000.0, "C": 0.0}
    assert balance_panel(panel, BalanceOptions(include_future=True)).before.phase_va["B"] == 1000.0
    assert balance_panel(panel).before.phase_va["B"] == 0.0


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1))
def test_model_arithmetic_matches_the_engine_loads(seed: int) -> None:
    """The objective the search minimises is the engine's own figure (server.calc.loads)."""
    panel, feeds = random_panel(random.Random(seed), max_movable=10, max_spaces=24)
    panel = replace(panel, circuits=tuple(replace(c, harmonic3_pct=0.0) for c in panel.circuits))
    model = build_model(panel, BalanceOptions(), False, feeds)
    loads, neutral = evaluate(model, tuple(tuple(sorted(t.original_starts)) for t in model.types))
    engine = panel_loading(panel, feeds_va=feeds)
    for value, phase in zip(loads, model.phases, strict=True):
        assert value == pytest.approx(engine.phase_va[phase], abs=1e-6)
    if engine.neutral_amps is not None:
        assert abs(neutral) == pytest.approx(engine.neutral_amps, abs=1e-6)


def test_before_figures_match_the_engine() -> None:
    """The balancer's 'before' is what ``panelwright calc`` reports (phase VA and neutral current)."""
    from server.calc.engine import compute_project

    project = load_project_file(DEMO_FILE)
    result = compute_project(project)
    for panel in project.panels:
        prop = balance_panel_in_project(project, panel.tag, BalanceOptions(solver=Solver.HEURISTIC))
        engine = result.panels[panel.tag]
        for phase, va in engine.connected_va.items():
            assert_close(prop.before.phase_va[phase], va, rel=1e-9, abs_=1e-6, what=f"{panel.tag} {phase}")
        if engine.neutral_amps is not None:
            assert_close(prop.before.neutral_amps or 0.0, engine.neutral_amps, rel=1e-9, abs_=1e-9, what=panel.tag)


def test_balance_core_imports_without_scipy() -> None:
    """server.calc.balance is standard library only; scipy loads only when the exact solver runs."""
    import json
    import subprocess
    import sys

    from tests.helpers import ROOT

    probe = (
        "import json, sys\n"
        "import server.calc.balance as b\n"
        "p = b.Panel(tag='X', system='208Y/120 3PH 4W', spaces=6, circuits=(b.Circuit(slot=1, va=100.0),"
        " b.Circuit(slot=2, va=900.0), b.Circuit(slot=3, va=500.0)))\n"
        "b.balance_panel(p, b.BalanceOptions(solver=b.Solver.HEURISTIC))\n"
        "print(json.dumps(sorted({m.split('.')[0] for m in sys.modules})))\n"
    )
    proc = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    top = set(json.loads(proc.stdout.strip().splitlines()[-1]))
    assert not top & {"numpy", "scipy"}


@pytest.mark.parametrize("seed", range(4))
def test_applied_transformer_proposal_stores_rotations_the_engine_agrees_with(seed: int) -> None:
    rng = random.Random(seed)
    project = _xfmr_project(rng, sub_count=3)
    prop = balance_transformer(project, "TX")
    applied = project
    for panel in prop.applied_panels():
        applied = replace_panel(applied, panel)
    applied = parse_project(dump_project(applied))  # the stored rotations are valid project-file values
    stored = {p.tag: p.feeder_rotation for p in applied.panels}
    assert stored == {r.panel_tag: r.feeder_rotation for r in prop.rotations}
    # The engine, fed the stored rotations, sees at the secondary what the proposal promised: DP is
    # the one panel on TX, landed with DP's rotation (its sub-panels relative to DP).
    res = compute_project(applied)
    secondary = rotate_phase_va(res.panels["DP"].connected_va, stored["DP"])
    for phase, va in prop.after_phase_va.items():
        assert secondary[phase] == pytest.approx(va, rel=1e-9, abs=1e-6)
    # Balancing again starts from the stored rotations: nothing left to gain.
    again = balance_transformer(applied, "TX")
    for phase, va in prop.after_phase_va.items():
        assert again.before_phase_va[phase] == pytest.approx(va, rel=1e-9, abs=1e-6)
    assert max(again.after_phase_va.values()) == pytest.approx(max(prop.after_phase_va.values()), rel=1e-9)


def test_a_rotated_sub_panel_presents_its_load_relabelled_to_the_panel_feeding_it() -> None:
    from server.calc.balance import presented_load

    data = {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "Rotation feed (invented)"},
        "sources": [{"tag": "S", "system": "208Y/120 3PH 4W"}],
        "panels": [
            {
                "tag": "D",
                "system": "208Y/120 3PH 4W",
                "fed_from": "S",
                "circuits": [{"slot": 1, "poles": 3, "feeds": "P"}],
            },
            {
                "tag": "P",
                "system": "208Y/120 3PH 4W",
                "feeder_rotation": 1,
                "circuits": [{"slot": 1, "va": 1200, "pf": 1.0}],
            },
        ],
    }
    project = parse_project(data)
    load = presented_load(project, "P", False)
    assert load.phase_va == {"A": 0.0, "B": 1200.0, "C": 0.0}  # P's A lands on D's B
    assert_close(abs(load.neutral_a), 10.0)  # 1 200 VA / 120 V, on D's B: angle −120°
    assert_close(math.degrees(cmath.phase(load.neutral_a)), -120.0, abs_=1e-6)
    assert panel_loading(project.panel("D"), feeds_va={"P": load}).phase_va == {"A": 0.0, "B": 1200.0, "C": 0.0}
