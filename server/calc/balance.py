"""Phase balancer: propose slot moves that even out the per-phase load of one panel.

Role: a pure function :func:`balance_panel` (and :func:`balance_panel_in_project`) returns a
frozen :class:`BalanceProposal` — the moves, the loading before and after, a proven lower bound
and the gap — without touching the input.  :func:`apply_moves` turns a panel into the proposed
one; applying :func:`inverse_moves` undoes it exactly.  :func:`balance_transformer` balances a
transformer secondary by choosing, per downstream panel, a cyclic rotation of its feeder phases
and then balancing inside each panel.

Standard library only.  The exact solver (mixed-integer programme on HiGHS through
``scipy.optimize.milp``) lives in :mod:`server.calc.balance_milp` and is imported lazily; without
scipy only the search below runs and the proposal says so (``solver``).

How an answer is found (see :func:`_solve`): a steepest-descent search from the present
arrangement (swaps and moves into free slots; milliseconds) gives a proposal with few moves.
Two proven lower bounds on the largest phase VA — :func:`phase_va_lower_bound` (closed form)
and :func:`assignment_lower_bound` (branch and bound over a relaxation) — certify it when it is
within ``mip_gap_pct`` (default 0.5 %); otherwise, and always on small panels (≤
``EXACT_BREAKERS`` movable breakers, solved to optimality), the MILP improves the objective and
then minimises the moves.  Every proposal carries its bound and gap, so the quality claim is
checked, never assumed.  Measured on 200 generated 42/84-slot panels
(``tests/benchmarks/bench_balance.py``): worst ratio to the bound about 1.004, median time about
0.1 s per 84-slot panel.

Conventions
-----------
* Phase VA (trade convention, common practice): a breaker of P poles puts VA/P on each phase it
  covers — 1-pole on its phase, 2-pole half on each of its two, 3-pole a third each.  Removed
  loads count 0; future loads count only when ``include_future`` (else the project setting).
* A ``feeds`` circuit carries what the element below presents (:func:`presented_load`): a panel
  its own phase VA and neutral phasor phase by phase (its A on this panel's A, as the engine
  counts it); a transformer its connected VA (:func:`subtree_va`, plus ``loss_pct``) split by
  the trade convention.  For the demo project every panel's phase VA and neutral current match
  ``panelwright calc`` (tested).
* Neutral current (phasor): I_N1 = |Σ I_k| over line-to-neutral (1-pole) circuits,
  I_k = (VA_k / |V_p|) ∠ (arg V_p − arccos pf_k) with V_p the phase-to-neutral phasor of
  :mod:`server.calc.systems` (lagging pf); line-to-line loads carry no neutral current.  The
  ``neutral`` objective minimises this fundamental.  Reported ``neutral_amps`` are computed by
  the engine's :mod:`server.calc.loads` (same phasors, plus third-harmonic currents in
  quadrature), so they match ``panelwright calc``; with ``harmonic3_pct`` = 0 they are equal.
* Slot geometry (:mod:`server.calc.systems`): odd slots left, even right, row = (slot+1)//2; a
  P-pole breaker at slot s takes s, s+2, s+4 (successive rows, one side).

What may move
-------------
Fixed: ``locked`` circuits, sub-feed breakers (``feeds`` set) and — unless ``allow_spaces`` —
every slot that is not held by a movable breaker.  Movable breakers keep their pole count.
Without ``allow_spaces`` the movable breakers are rearranged within exactly the slots they hold
now.  With ``allow_spaces`` they may use any slot 1..``spaces`` not held by a fixed breaker; a
``space`` entry (0 poles) a breaker lands on is moved to a slot the breakers vacated (lowest
first), so nothing in the schedule is lost.  ``keep_sides`` keeps each breaker on its side.
Project-file rules hold for every proposal: no 1-pole breaker on the high leg (B rows of
``240/120 3PH 4W``), nothing beyond ``spaces``, no overlaps (1-pole loads cannot exist on a
3-wire delta, so none are ever created there).

Moves
-----
A move ``Move(from_slot, to_slot)`` says: the entry whose first slot is ``from_slot`` in the
input panel gets first slot ``to_slot``.  A list of moves is a permutation applied *at once*:
every listed entry is lifted first, then all are set down, so swaps and cycles need no
temporary slot.  Entries not listed stay.  :func:`inverse_moves` swaps from/to; applying it to
the result restores the input exactly (circuit order in ``Panel.circuits`` is kept; only
``slot`` changes).  ``max_moves`` counts moved breakers; relocated ``space`` entries are listed
but not counted.

Objectives
----------
``max-phase`` (default): minimise the largest phase VA.  ``neutral``: minimise the phasor
neutral current.  Then, among arrangements within ``tolerance_pct`` of the best value found,
the number of moved breakers is minimised — proven by the MILP when ``moves_minimal`` is true
(always on small panels, or with ``fewest_moves``), otherwise the search's few-moves answer.
``max_moves`` caps the moved breakers in both steps.
"""

from __future__ import annotations

import cmath
import functools
import itertools
import math
import time
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from enum import StrEnum
from types import ModuleType

from . import loads
from .errors import Problem, ProjectFileError
from .model import Circuit, Panel, Project
from .systems import SYSTEMS, SystemKind, SystemSpec, breaker_phases, slot_side
from .systems import breaker_slots as _breaker_slots

# slot geometry is asked for hundreds of thousands of times by the search; it never changes
breaker_slots = functools.lru_cache(maxsize=4096)(_breaker_slots)

#: Directions of the polygon that stands in for |I_N| in the linear programme (see
#: :mod:`server.calc.balance_milp`): max projection ≥ |v|·cos(π/K).
NEUTRAL_DIRECTIONS = 24


class Objective(StrEnum):
    MAX_PHASE = "max-phase"
    NEUTRAL = "neutral"


class Solver(StrEnum):
    AUTO = "auto"  # exact MILP when scipy is importable, else the heuristic
    MILP = "milp"
    HEURISTIC = "heuristic"


@dataclass(frozen=True)
class BalanceOptions:
    objective: Objective = Objective.MAX_PHASE
    max_moves: int | None = None  # cap on moved breakers; None = no cap
    keep_sides: bool = False
    allow_spaces: bool = False
    include_future: bool | None = None  # None = the project's setting (False for a bare panel)
    tolerance_pct: float = 0.0  # moves are minimised among arrangements within this % of the best found
    time_limit_s: float = 5.0  # per solver call
    mip_gap_pct: float = 0.5  # proven gap (%) at which the search stops: heuristic certificate or exact solver
    solver: Solver = Solver.AUTO
    fewest_moves: bool = False  # also run the exact fewest-moves step when the bound already certifies the search


@dataclass(frozen=True)
class Move:
    from_slot: int
    to_slot: int

    def to_json(self) -> dict[str, int]:
        return {"from_slot": self.from_slot, "to_slot": self.to_slot}


@dataclass(frozen=True)
class PhaseLoading:
    """Loading of one arrangement."""

    phase_va: dict[str, float]  # trade convention, only the phases the system has
    neutral_amps: float | None  # phasor neutral current; None when the system has no neutral

    @property
    def max_phase_va(self) -> float:
        return max(self.phase_va.values()) if self.phase_va else 0.0

    @property
    def imbalance_pct(self) -> float:
        """The engine's imbalance figure (:func:`server.calc.loads.imbalance_pct`): 100 × max|S_p − S_avg| / S_avg."""
        return loads.imbalance_pct(self.phase_va)

    def to_json(self) -> dict[str, object]:
        return {
            "phase_va": {k: round(v, 1) for k, v in self.phase_va.items()},
            "max_phase_va": round(self.max_phase_va, 1),
            "imbalance_pct": round(self.imbalance_pct, 2),
            "neutral_amps": None if self.neutral_amps is None else round(self.neutral_amps, 2),
        }


@dataclass(frozen=True)
class BalanceProposal:
    """The balancer's answer for one panel.  ``panel`` is the proposed panel (input unchanged)."""

    panel_tag: str
    system: str
    options: BalanceOptions
    before: PhaseLoading
    after: PhaseLoading
    moves: tuple[Move, ...]
    breaker_moves: int  # moved breakers (space entries excluded)
    lower_bound_va: float  # proven lower bound on the largest phase VA (see phase_va_lower_bound)
    lower_bound_neutral_amps: float | None  # proven bound on I_N (neutral objective only)
    gap_pct: float | None  # (achieved − bound) / bound × 100 on the chosen objective; None if the bound is 0
    proven_optimal: bool  # gap ≤ 0.001 %: the objective is optimal (to solver tolerance)
    moves_minimal: bool  # the solver proved no arrangement within tolerance needs fewer moved breakers
    solver: str
    panel: Panel
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, object]:
        return {
            "panel": self.panel_tag,
            "system": self.system,
            "objective": self.options.objective.value,
            "before": self.before.to_json(),
            "after": self.after.to_json(),
            "lower_bound_va": round(self.lower_bound_va, 1),
            "lower_bound_neutral_amps": (
                None if self.lower_bound_neutral_amps is None else round(self.lower_bound_neutral_amps, 2)
            ),
            "gap_pct": None if self.gap_pct is None else round(self.gap_pct, 4),
            "proven_optimal": self.proven_optimal,
            "moves_minimal": self.moves_minimal,
            "solver": self.solver,
            "moves": [m.to_json() for m in self.moves],
            "breaker_moves": self.breaker_moves,
            "options": {
                "max_moves": self.options.max_moves,
                "keep_sides": self.options.keep_sides,
                "allow_spaces": self.options.allow_spaces,
                "tolerance_pct": self.options.tolerance_pct,
            },
            "notes": list(self.notes),
        }


# --------------------------------------------------------------------------- loading


def _spec(panel: Panel) -> SystemSpec:
    spec = SYSTEMS.get(panel.system)
    if spec is None:
        raise ProjectFileError([Problem(f"unknown system {panel.system!r}", panel.tag, field="system")])
    return spec


@dataclass(frozen=True)
class FeedLoad:
    """What a sub-feed breaker carries.

    ``va`` is the connected VA of everything below it.  For a panel fed from this one (same
    system: the project file requires it) ``phase_va`` and ``neutral_a`` give what it presents
    phase by phase — its phase A on this panel's A (on index r when its ``feeder_rotation`` is r),
    as the engine counts it — so the fixed load
    of the sub-feed is exact, not a third on each phase.  Without them (a transformer below)
    the trade convention splits ``va`` evenly over the breaker's poles.
    """

    va: float
    phase_va: Mapping[str, float] | None = None
    neutral_a: complex = 0j


def _feed(circuit: Circuit, feeds_va: Mapping[str, float | FeedLoad]) -> FeedLoad:
    value = feeds_va.get(circuit.feeds or "", 0.0)
    return value if isinstance(value, FeedLoad) else FeedLoad(float(value))


def circuit_load_va(circuit: Circuit, include_future: bool, feeds_va: Mapping[str, float | FeedLoad]) -> float:
    """VA a circuit counts with: its ``va`` (0 if absent), the subtree VA for ``feeds``, 0 if not counted."""
    if circuit.is_space or not circuit.counts(include_future):
        return 0.0
    if circuit.feeds is not None:
        return _feed(circuit, feeds_va).va
    return float(circuit.va or 0.0)


def _fixed_contribution(
    spec: SystemSpec, c: Circuit, include_future: bool, feeds_va: Mapping[str, float | FeedLoad]
) -> tuple[dict[str, float], complex]:
    """Phase VA and neutral phasor (fundamental) of a circuit where it stands."""
    va = circuit_load_va(c, include_future, feeds_va)
    if va == 0.0:
        return {}, 0j
    if c.feeds is not None:
        feed = _feed(c, feeds_va)
        if feed.phase_va is not None:
            return {p: x for p, x in feed.phase_va.items() if p in spec.phases}, feed.neutral_a
    return _placement_phase_va(spec, c.slot, max(c.poles, 1), va), _placement_neutral(
        spec, c.slot, c.poles, va, c.effective_pf
    )


@functools.lru_cache(maxsize=4096)
def _phases_at(spec: SystemSpec, slot: int, poles: int) -> tuple[str, ...]:
    return breaker_phases(spec, slot, poles)


def _placement_phase_va(spec: SystemSpec, slot: int, poles: int, va: float) -> dict[str, float]:
    phases = _phases_at(spec, slot, poles)
    share = va / len(phases)
    out: dict[str, float] = {}
    for p in phases:
        out[p] = out.get(p, 0.0) + share
    return out


def _placement_neutral(spec: SystemSpec, slot: int, poles: int, va: float, pf: float) -> complex:
    if poles != 1 or not spec.has_neutral or va == 0.0:
        return 0j
    v = spec.phase_voltage(breaker_phases(spec, slot, 1)[0])
    return cmath.rect(va / abs(v), cmath.phase(v) - math.acos(max(-1.0, min(1.0, pf))))


def panel_loading(
    panel: Panel, *, include_future: bool = False, feeds_va: Mapping[str, float | FeedLoad] | None = None
) -> PhaseLoading:
    """Phase VA (trade convention) and neutral current of a panel as arranged.

    Uses the calculation engine's own load functions (:mod:`server.calc.loads`) so the figures
    match ``panelwright calc``: the neutral current is the phasor sum of the line-to-neutral
    currents, with third-harmonic currents (``harmonic3_pct``) added in quadrature.
    """
    spec = _spec(panel)
    feeds = feeds_va or {}
    phase_va = dict.fromkeys(spec.phases, 0.0)
    neutral_terms: list[tuple[complex, float, complex]] = []
    for c in panel.circuits:
        va = circuit_load_va(c, include_future, feeds)
        if va == 0.0:
            continue
        if c.feeds is not None and _feed(c, feeds).phase_va is not None:
            contribution, neutral = _fixed_contribution(spec, c, include_future, feeds)
            for p, x in contribution.items():
                phase_va[p] += x
            neutral_terms.append((neutral, 0.0, 1.0))
            continue
        for p, x in loads.circuit_phase_va(spec, c.slot, c.poles, va).items():
            phase_va[p] += x
        if c.poles == 1 and spec.has_neutral:
            for p, current in loads.circuit_currents(spec, c.slot, 1, va, c.effective_pf).items():
                neutral_terms.append((current, c.harmonic3_pct, loads.triplen_rotation(spec, p)))
    return PhaseLoading(phase_va, loads.neutral_from_loads(neutral_terms) if spec.has_neutral else None)


def subtree_va(project: Project, tag: str, include_future: bool, _seen: frozenset[str] = frozenset()) -> float:
    """Connected VA of everything fed by element ``tag`` (panel or transformer), counted loads only."""
    if tag in _seen:  # a loop is reported by parse_project; never recurse forever
        return 0.0
    seen = _seen | {tag}
    panel = project.panel(tag)
    if panel is not None:
        total = 0.0
        for c in panel.circuits:
            if c.is_space or not c.counts(include_future):
                continue
            total += subtree_va(project, c.feeds, include_future, seen) if c.feeds else float(c.va or 0.0)
        return total
    xfmr = project.transformer(tag)
    if xfmr is None:
        return 0.0
    below = sum(subtree_va(project, p.tag, include_future, seen) for p in _panels_fed_from(project, tag))
    return below * (1.0 + xfmr.loss_pct / 100.0)


def _panels_fed_from(project: Project, tag: str) -> list[Panel]:
    """Panels fed straight from a transformer or source ``tag`` (by ``fed_from``)."""
    fed_by_circuit = {c.feeds for p in project.panels for c in p.circuits if c.feeds}
    return [p for p in project.panels if p.fed_from == tag and p.tag not in fed_by_circuit]


def presented_load(project: Project, tag: str, include_future: bool, _seen: frozenset[str] = frozenset()) -> FeedLoad:
    """What element ``tag`` presents to the breaker feeding it (see :class:`FeedLoad`)."""
    total = subtree_va(project, tag, include_future)
    panel = project.panel(tag)
    if panel is None or tag in _seen:
        return FeedLoad(total)
    spec = _spec(panel)
    seen = _seen | {tag}
    phase_va = dict.fromkeys(spec.phases, 0.0)
    neutral = 0j
    for c in panel.circuits:
        if c.is_space or not c.counts(include_future):
            continue
        if c.feeds is not None:
            child = presented_load(project, c.feeds, include_future, seen)
            contribution, n = _fixed_contribution(spec, c, include_future, {c.feeds: child})
        else:
            contribution, n = _fixed_contribution(spec, c, include_future, {})
        for p, x in contribution.items():
            phase_va[p] += x
        neutral += n
    if panel.feeder_rotation and len(phase_va) == 3:
        # Landed rotated: the parent sees the phases relabelled and the phasors turned by
        # exp(−j·120°·r), as the engine does (server.calc.engine._rotated).
        phase_va = rotate_phase_va(phase_va, panel.feeder_rotation)
        neutral *= cmath.rect(1.0, -2.0 * math.pi * panel.feeder_rotation / 3.0)
    return FeedLoad(total, phase_va, neutral)


def feeds_va_map(project: Project, panel: Panel, include_future: bool) -> dict[str, FeedLoad]:
    """The load each sub-feed breaker of ``panel`` carries, by the tag it feeds."""
    return {c.feeds: presented_load(project, c.feeds, include_future) for c in panel.circuits if c.feeds}


# --------------------------------------------------------------------------- moves


def inverse_moves(moves: Iterable[Move]) -> tuple[Move, ...]:
    """The moves that undo ``moves`` (applied to the panel ``moves`` produced)."""
    return tuple(sorted((Move(m.to_slot, m.from_slot) for m in moves), key=lambda m: m.from_slot))


def _occupied(c: Circuit) -> tuple[int, ...]:
    return (c.slot,) if c.is_space else breaker_slots(c.slot, c.poles)


def apply_moves(panel: Panel, moves: Iterable[Move]) -> Panel:
    """The panel with ``moves`` applied at once (see the module docstring).

    Raises :class:`ProjectFileError` naming the panel and slot when a move names no entry, two
    moves share a slot, or the result breaks a project-file rule (overlap, high leg, beyond
    ``spaces``).  The input is never changed.
    """
    from .projectfile import check_panel  # local: projectfile imports the tables package

    moves = tuple(moves)
    problems: list[Problem] = []
    by_slot: dict[int, int] = {}
    for i, c in enumerate(panel.circuits):
        by_slot.setdefault(c.slot, i)
    targets: dict[int, int] = {}
    seen_from: set[int] = set()
    seen_to: set[int] = set()
    for m in moves:
        if m.from_slot not in by_slot:
            problems.append(Problem(f"no circuit starts at slot {m.from_slot} to move", panel.tag, m.from_slot, "slot"))
            continue
        if m.from_slot in seen_from:
            problems.append(Problem(f"slot {m.from_slot} is moved twice", panel.tag, m.from_slot, "slot"))
            continue
        if m.to_slot in seen_to:
            problems.append(Problem(f"two moves land on slot {m.to_slot}", panel.tag, m.to_slot, "slot"))
            continue
        if m.to_slot < 1:
            problems.append(Problem(f"slot {m.to_slot} does not exist", panel.tag, m.from_slot, "slot"))
            continue
        seen_from.add(m.from_slot)
        seen_to.add(m.to_slot)
        targets[by_slot[m.from_slot]] = m.to_slot
    if problems:
        raise ProjectFileError(problems)
    circuits = tuple(replace(c, slot=targets[i]) if i in targets else c for i, c in enumerate(panel.circuits))
    result = replace(panel, circuits=circuits)
    check_panel(result, problems)
    if problems:
        raise ProjectFileError(problems)
    return result


# --------------------------------------------------------------------------- placement model


@dataclass(frozen=True)
class PlacementType:
    """Movable breakers that are interchangeable for the objective (same poles, load, pf, side rule)."""

    poles: int
    va: float
    pf: float
    members: tuple[int, ...]  # indexes into Panel.circuits, ascending by original slot
    starts: tuple[int, ...]  # feasible first slots
    phase_va: tuple[tuple[float, ...], ...]  # per start: VA on each phase of the system (order of spec.phases)
    neutral_a: tuple[complex, ...]  # per start: neutral current phasor contribution
    original_starts: tuple[int, ...]  # members' current first slots

    @functools.cached_property
    def index(self) -> dict[int, int]:
        """Position of each start in ``starts``."""
        return {s: j for j, s in enumerate(self.starts)}


@dataclass(frozen=True)
class PlacementModel:
    """The balancing problem as data, shared by the heuristic and :mod:`server.calc.balance_milp`."""

    phases: tuple[str, ...]
    region: tuple[int, ...]  # slots the movable breakers may occupy
    fixed_phase_va: tuple[float, ...]
    fixed_neutral_a: complex
    has_neutral: bool
    types: tuple[PlacementType, ...]
    total_breakers: int

    def covered(self, t: PlacementType, start: int) -> tuple[int, ...]:
        return breaker_slots(start, t.poles)


@dataclass(frozen=True)
class PlacementSolution:
    starts: tuple[tuple[int, ...], ...]  # per type, the chosen first slots (len = members)
    dual_bound: float | None  # proven bound on the objective of this step (None if unknown)
    optimal: bool
    best_value: float | None = None  # the search: best objective value it reached (``starts`` may trade some for moves)


def build_model(
    panel: Panel,
    options: BalanceOptions,
    include_future: bool,
    feeds_va: Mapping[str, float | FeedLoad],
    *,
    multi_pole_fixed: bool = False,
) -> PlacementModel:
    """The placement problem of ``panel``; ``multi_pole_fixed`` keeps 2- and 3-pole breakers where they are."""
    spec = _spec(panel)
    phases = spec.phases
    fixed_va = dict.fromkeys(phases, 0.0)
    fixed_neutral = 0j
    fixed_slots: set[int] = set()
    movable: list[int] = []
    for i, c in enumerate(panel.circuits):
        is_fixed = (
            c.locked
            or c.feeds is not None
            or (c.is_space and not options.allow_spaces)
            or (multi_pole_fixed and c.poles > 1)
        )
        if c.is_space and options.allow_spaces:
            continue  # a space entry is a filler the breakers may displace
        if is_fixed or len(phases) == 1:
            fixed_slots.update(_occupied(c))
            contribution, neutral = _fixed_contribution(spec, c, include_future, feeds_va)
            for p, x in contribution.items():
                fixed_va[p] += x
            fixed_neutral += neutral
        else:
            movable.append(i)
    if options.allow_spaces:
        region = tuple(s for s in range(1, panel.spaces + 1) if s not in fixed_slots)
    else:
        region = tuple(sorted(s for i in movable for s in _occupied(panel.circuits[i])))
    region_set = set(region)

    groups: dict[tuple, list[int]] = {}
    for i in movable:
        c = panel.circuits[i]
        va = circuit_load_va(c, include_future, feeds_va)
        pf = round(c.effective_pf, 9) if (c.poles == 1 and spec.has_neutral and va) else 1.0
        side = slot_side(c.slot) if options.keep_sides else ""
        groups.setdefault((c.poles, round(va, 6), pf, side), []).append(i)
    types: list[PlacementType] = []
    for (poles, va, pf, side), members in sorted(
        groups.items(), key=lambda kv: (kv[0][0], kv[0][1], kv[0][2], kv[0][3])
    ):
        members.sort(key=lambda i: panel.circuits[i].slot)
        starts = []
        for s in region:
            if side and slot_side(s) != side:
                continue
            cov = breaker_slots(s, poles)
            if any(x not in region_set for x in cov):
                continue
            if poles == 1 and spec.high_leg and _phases_at(spec, s, 1)[0] == spec.high_leg:
                continue
            starts.append(s)
        pv = []
        na = []
        by_phases: dict[tuple[str, ...], tuple[tuple[float, ...], complex]] = {}
        for s in starts:
            key = _phases_at(spec, s, poles)
            if key not in by_phases:  # the contribution depends only on the phases covered
                d = _placement_phase_va(spec, s, poles, va)
                by_phases[key] = (tuple(d.get(p, 0.0) for p in phases), _placement_neutral(spec, s, poles, va, pf))
            pv.append(by_phases[key][0])
            na.append(by_phases[key][1])
        types.append(
            PlacementType(
                poles=poles,
                va=va,
                pf=pf,
                members=tuple(members),
                starts=tuple(starts),
                phase_va=tuple(pv),
                neutral_a=tuple(na),
                original_starts=tuple(panel.circuits[i].slot for i in members),
            )
        )
    return PlacementModel(
        phases=phases,
        region=region,
        fixed_phase_va=tuple(fixed_va[p] for p in phases),
        fixed_neutral_a=fixed_neutral,
        has_neutral=spec.has_neutral,
        types=tuple(types),
        total_breakers=len(movable),
    )


def evaluate(model: PlacementModel, starts: Sequence[Sequence[int]]) -> tuple[tuple[float, ...], complex]:
    """Phase VA (system order) and neutral phasor of a placement given as starts per type."""
    va = list(model.fixed_phase_va)
    neutral = model.fixed_neutral_a
    for t, chosen in zip(model.types, starts, strict=True):
        index = t.index
        for s in chosen:
            j = index[s]
            for k, x in enumerate(t.phase_va[j]):
                va[k] += x
            neutral += t.neutral_a[j]
    return tuple(va), neutral


def kept_count(model: PlacementModel, starts: Sequence[Sequence[int]]) -> int:
    return sum(len(set(t.original_starts) & set(chosen)) for t, chosen in zip(model.types, starts, strict=True))


def objective_value(model: PlacementModel, starts: Sequence[Sequence[int]], objective: Objective) -> float:
    va, neutral = evaluate(model, starts)
    return abs(neutral) if objective == Objective.NEUTRAL else max(va)


# --------------------------------------------------------------------------- lower bound


def phase_va_lower_bound(model: PlacementModel) -> float:
    """A lower bound on the largest phase VA over every feasible arrangement.

    With F_p the fixed load on phase p (fixed breakers, plus — whatever their position — nothing
    else) and, for movable breaker c and a set S of phases, m_c(S) = min over c's feasible starts
    of the VA c puts on phases in S:

    LB = max( max over non-empty S ⊆ phases of (Σ_{p∈S} F_p + Σ_c m_c(S)) / |S| ,
              max over c of min over c's starts of max_p (F_p + VA_c(p)) ).

    Proof.  Take any feasible arrangement with phase loads L_p.  For a set S,
    Σ_{p∈S} L_p = Σ_{p∈S} F_p + Σ_c VA_c(S) ≥ Σ_{p∈S} F_p + Σ_c m_c(S), and the largest L_p in S
    is at least their mean, so max_p L_p ≥ the first term for every S (S = all phases gives the
    average, S = {p} gives F_p, S = {A, C} on a high-leg panel carries all 1-pole load).  For one
    breaker c at start s, all other contributions are ≥ 0, so max_p L_p ≥ max_p (F_p + VA_c(p)) ≥
    the min over c's feasible starts.  Both terms are bounds, hence their maximum.  ∎
    """
    n = len(model.phases)
    best = max(model.fixed_phase_va) if n else 0.0
    for size in range(1, n + 1):
        for subset in itertools.combinations(range(n), size):
            total = sum(model.fixed_phase_va[p] for p in subset)
            for t in model.types:
                if not t.starts:
                    continue
                m = min(sum(pv[p] for p in subset) for pv in set(t.phase_va))
                total += m * len(t.members)
            best = max(best, total / size)
    for t in model.types:
        if t.starts:
            single = min(max(f + x for f, x in zip(model.fixed_phase_va, pv, strict=True)) for pv in set(t.phase_va))
            best = max(best, single)
    return best


def assignment_lower_bound(model: PlacementModel, upper_va: float, *, node_limit: int = 30_000) -> float | None:
    """A lower bound on the largest phase VA from the phase-assignment relaxation, or None if cut short.

    Relaxation: forget where on the panel a breaker sits and keep only which phases it lands on.
    Each movable breaker picks one of the phase patterns its feasible starts offer (so high-leg
    and side rules still narrow the choice), 3-pole breakers add a third to every phase, and the
    slots of each phase limit how many poles may land on it (sides merged; breakers carrying no
    load left out).  Every real arrangement gives such a choice with the same phase loads, so
    the least largest phase VA over the choices (R*) is ≤ the optimum: a valid lower bound.

    R* is found by depth-first branch and bound (heaviest breakers first, identical breakers
    kept in non-decreasing pattern order, nodes cut when max(max_p L_p, (Σ L_p + VA left)/n)
    reaches the best leaf so far, starting from ``upper_va``, a value some arrangement achieves).
    A finished search proves R* = the best leaf (or R* ≥ ``upper_va`` when no leaf beats it).
    After ``node_limit`` nodes it gives up and returns None.
    """
    n = len(model.phases)
    if n < 2:
        return None
    base = list(model.fixed_phase_va)
    capacity = [0] * n
    index = {s: ((s + 1) // 2 - 1) % n for s in model.region}
    for s in model.region:
        capacity[index[s]] += 1
    items: list[tuple[float, int, tuple[tuple[tuple[float, ...], tuple[int, ...]], ...]]] = []
    for ti, t in enumerate(model.types):
        patterns: set[tuple[tuple[float, ...], tuple[int, ...]]] = set()
        for s, pv in zip(t.starts, t.phase_va, strict=True):
            use = [0] * n
            for x in breaker_slots(s, t.poles):
                use[index[x]] += 1
            patterns.add((pv, tuple(use)))
        if not patterns:
            return None  # a breaker with nowhere to go: no bound from here
        if len(patterns) == 1:  # one choice: its load and its slots are fixed
            pv, use = next(iter(patterns))
            for _ in t.members:
                for k in range(n):
                    base[k] += pv[k]
                    capacity[k] -= use[k]
            continue
        if t.va == 0.0:
            continue  # no load, several choices: leaving its slots out only loosens the relaxation
        options = tuple(sorted(patterns))
        for _ in t.members:
            items.append((t.va, ti, options))
    if any(c < 0 for c in capacity):
        return None
    items.sort(key=lambda it: (-it[0], it[1]))
    remaining = [0.0] * (len(items) + 1)
    for i in range(len(items) - 1, -1, -1):
        remaining[i] = remaining[i + 1] + items[i][0]
    best = upper_va
    nodes = 0
    loads = base[:]
    cap = capacity[:]

    def dfs(i: int, prev_type: int, prev_opt: int) -> bool:
        nonlocal best, nodes
        nodes += 1
        if nodes > node_limit:
            return False
        current = max(loads)
        if max(current, (sum(loads) + remaining[i]) / n) >= best - 1e-9:
            return True
        if i == len(items):
            best = current
            return True
        _va, ti, options = items[i]
        first = prev_opt if ti == prev_type else 0
        for j in range(first, len(options)):
            pv, use = options[j]
            if any(cap[k] < use[k] for k in range(n)):
                continue
            for k in range(n):
                loads[k] += pv[k]
                cap[k] -= use[k]
            ok = dfs(i + 1, ti, j)
            for k in range(n):
                loads[k] -= pv[k]
                cap[k] += use[k]
            if not ok:
                return False
        return True

    if not dfs(0, -1, 0):
        return None
    return best


# --------------------------------------------------------------------------- heuristic


def solve_heuristic(
    model: PlacementModel,
    objective: Objective,
    *,
    max_moves: int | None = None,
    tolerance_pct: float = 0.0,
    time_limit_s: float = 5.0,
) -> PlacementSolution:
    """Two descents from the present arrangement (steepest, and fewest-moves-first); of every
    state either visited, the one with the fewest moved breakers within ``tolerance_pct`` of the
    best value found.  See :func:`_descent`.  No optimality claim; the caller compares with
    :func:`phase_va_lower_bound`.
    """
    deadline = time.monotonic() + time_limit_s
    paths: list[tuple[float, int, tuple[int, ...]]] = []
    tidx: list[int] = []
    for few_first in (False, True):
        tidx, path = _descent(model, objective, max_moves, deadline, few_moves_first=few_first)
        paths.extend(path)
    best_value = min(p[0] for p in paths)
    cap = best_value * (1.0 + tolerance_pct / 100.0) + 1e-6 * max(1.0, best_value)
    _value, _moves, chosen = min((p for p in paths if p[0] <= cap), key=lambda p: (p[1], p[0]))
    start = _revert_pass(model, objective, tidx, list(chosen), cap, deadline)
    return PlacementSolution(_starts_from(model, tidx, start), None, False, best_value)


def _revert_pass(
    model: PlacementModel, objective: Objective, tidx: Sequence[int], start: list[int], cap: float, deadline: float
) -> list[int]:
    """Put moved breakers back where they were while the objective stays ≤ cap.

    A moved breaker returns to its original first slot when that slot is free, or by swapping
    with the one breaker of equal pole count now there (which takes the returning breaker's
    place).  Each accepted step lowers the number of moved breakers, so the pass ends.
    """
    orig = [s for t in model.types for s in t.original_starts]
    poles = [model.types[ti].poles for ti in tidx]
    feasible = [set(t.starts) for t in model.types]

    def value() -> float:
        return objective_value(model, _starts_from(model, tidx, start), objective)

    changed = True
    while changed and time.monotonic() < deadline:
        changed = False
        occ = {x: b for b in range(len(start)) for x in breaker_slots(start[b], poles[b])}
        for a in range(len(start)):
            if start[a] == orig[a]:
                continue
            here = start[a]
            blockers = {occ[x] for x in breaker_slots(orig[a], poles[a]) if x in occ} - {a}
            if len(blockers) > 1:
                continue
            saved = list(start)
            start[a] = orig[a]
            if blockers:
                b = blockers.pop()
                if poles[b] != poles[a] or here not in feasible[tidx[b]]:
                    start[:] = saved
                    continue
                start[b] = here
            elif any(occ.get(x, a) != a for x in breaker_slots(orig[a], poles[a])):
                start[:] = saved
                continue
            if value() <= cap:
                changed = True
                occ = {x: b for b in range(len(start)) for x in breaker_slots(start[b], poles[b])}
            else:
                start[:] = saved
    return start


def _descent(
    model: PlacementModel,
    objective: Objective,
    max_moves: int | None,
    deadline: float,
    *,
    few_moves_first: bool,
) -> tuple[list[int], list[tuple[float, int, tuple[int, ...]]]]:
    """Descent from the present arrangement; returns (type of each breaker, visited states).

    Each step applies the single best exchange — a swap of two breakers of equal pole count (each
    start feasible for the other) or a move of one breaker into free slots — ranked by
    (objective, Σ phase VA²) for max-phase (the second term walks across plateaus where two
    phases tie) or (|I_N|, largest phase VA) for neutral.  It stops when no exchange improves or
    ``max_moves`` would be exceeded.  ``few_moves_first`` ranks improving exchanges by the
    change in moved breakers first, then by the ranking above.  Each visited state is returned
    as (objective value, moved breakers, first slot of each breaker).
    """
    n_ph = len(model.phases)
    use_neutral = objective == Objective.NEUTRAL
    tidx: list[int] = []
    start: list[int] = []
    for ti, t in enumerate(model.types):
        for s in t.original_starts:
            tidx.append(ti)
            start.append(s)
    orig = list(start)
    nb = len(start)
    pv = [dict(zip(t.starts, t.phase_va, strict=True)) for t in model.types]
    nv = [dict(zip(t.starts, t.neutral_a, strict=True)) for t in model.types]
    poles = [model.types[ti].poles for ti in tidx]
    loads, neutral = evaluate(model, _starts_from(model, tidx, start))
    loads = list(loads)
    occ: dict[int, int] = {}
    for b in range(nb):
        for x in breaker_slots(start[b], poles[b]):
            occ[x] = b

    def key(ld: Sequence[float], nn: complex) -> tuple[float, float]:
        if use_neutral:
            return (round(abs(nn), 9), max(ld))
        return (round(max(ld), 6), sum(x * x for x in ld))

    def better(k2: tuple[float, float], cur: tuple[float, float]) -> bool:
        # margins keep float noise (e.g. swapping two 3-pole breakers) from counting as progress
        tol0 = 1e-7 * max(1.0, abs(cur[0]))
        if k2[0] < cur[0] - tol0:
            return True
        return k2[0] <= cur[0] + tol0 and k2[1] < cur[1] - 1e-9 * max(1.0, abs(cur[1]))

    # moves into free slots only exist when the region has slots no breaker holds
    has_free = len(occ) < len(model.region)

    def prefer(k2: tuple[float, float], dm: int, incumbent: tuple) -> bool:
        if few_moves_first and dm != incumbent[4]:
            return dm < incumbent[4]
        return better(k2, incumbent[0]) or (k2 == incumbent[0] and dm < incumbent[4])

    moved = 0
    current = key(loads, neutral)
    path: list[tuple[float, int, tuple[int, ...]]] = [(current[0], 0, tuple(start))]
    while time.monotonic() < deadline:
        best: tuple[tuple[float, float], int, int, int, int] | None = None  # key, kind, a, b/start, dmoves
        for a in range(nb):
            ta, sa = tidx[a], start[a]
            pa, na = pv[ta], nv[ta]
            va_a, vn_a = pa[sa], na[sa]
            for b in range(a + 1, nb):
                tb = tidx[b]
                if tb == ta or poles[b] != poles[a]:
                    continue
                sb = start[b]
                if sb not in pa or sa not in pv[tb]:
                    continue
                pb = pv[tb]
                ld = [loads[k] - va_a[k] - pb[sb][k] + pa[sb][k] + pb[sa][k] for k in range(n_ph)]
                nn = neutral - vn_a - nv[tb][sb] + na[sb] + nv[tb][sa]
                dm = (sb != orig[a]) - (sa != orig[a]) + (sa != orig[b]) - (sb != orig[b])
                if max_moves is not None and moved + dm > max_moves:
                    continue
                k2 = key(ld, nn)
                if better(k2, current) and (best is None or prefer(k2, dm, best)):
                    best = (k2, 0, a, b, dm)
            for s in model.types[ta].starts if has_free else ():
                if s == sa:
                    continue
                if any(occ.get(x, a) != a for x in breaker_slots(s, poles[a])):
                    continue
                ld = [loads[k] - va_a[k] + pa[s][k] for k in range(n_ph)]
                nn = neutral - vn_a + na[s]
                dm = (s != orig[a]) - (sa != orig[a])
                if max_moves is not None and moved + dm > max_moves:
                    continue
                k2 = key(ld, nn)
                if better(k2, current) and (best is None or prefer(k2, dm, best)):
                    best = (k2, 1, a, s, dm)
        if best is None:
            break
        k2, kind, a, other, dm = best
        if kind == 0:
            b = other
            sa, sb = start[a], start[b]
            moves_ab = ((a, sa, sb), (b, sb, sa))
        else:
            moves_ab = ((a, start[a], other),)
        for br, old, _new in moves_ab:
            ti = tidx[br]
            for k in range(n_ph):
                loads[k] -= pv[ti][old][k]
            neutral -= nv[ti][old]
        for br, _old, new in moves_ab:
            ti = tidx[br]
            for k in range(n_ph):
                loads[k] += pv[ti][new][k]
            neutral += nv[ti][new]
            start[br] = new
        for br, old, _new in moves_ab:
            for x in breaker_slots(old, poles[br]):
                if occ.get(x) == br:
                    del occ[x]
        for br, _old, new in moves_ab:
            for x in breaker_slots(new, poles[br]):
                occ[x] = br
        moved += dm
        current = k2
        path.append((current[0], moved, tuple(start)))
    return tidx, path


def _starts_from(model: PlacementModel, tidx: Sequence[int], start: Sequence[int]) -> tuple[tuple[int, ...], ...]:
    out: list[list[int]] = [[] for _ in model.types]
    for ti, s in zip(tidx, start, strict=True):
        out[ti].append(s)
    return tuple(tuple(sorted(x)) for x in out)


# --------------------------------------------------------------------------- realisation


def _realise(panel: Panel, model: PlacementModel, starts: Sequence[Sequence[int]]) -> tuple[Move, ...]:
    """Turn chosen starts per type into moves: breakers keep their slot where their type keeps it."""
    moves: list[Move] = []
    new_slots: set[int] = set()
    old_slots: set[int] = set()
    for t, chosen in zip(model.types, starts, strict=True):
        chosen_set = set(chosen)
        staying = {panel.circuits[i].slot for i in t.members if panel.circuits[i].slot in chosen_set}
        free = sorted(chosen_set - staying)
        movers = [i for i in t.members if panel.circuits[i].slot not in staying]
        for i, s in zip(movers, free, strict=True):
            moves.append(Move(panel.circuits[i].slot, s))
        for i in t.members:
            old_slots.update(breaker_slots(panel.circuits[i].slot, t.poles))
        for s in chosen:
            new_slots.update(breaker_slots(s, t.poles))
    vacated = sorted(old_slots - new_slots)
    for c in sorted((c for c in panel.circuits if c.is_space), key=lambda c: c.slot):
        if c.slot in new_slots:
            moves.append(Move(c.slot, vacated.pop(0)))
    return tuple(sorted(moves, key=lambda m: m.from_slot))


def _current_starts(model: PlacementModel) -> tuple[tuple[int, ...], ...]:
    return tuple(tuple(sorted(t.original_starts)) for t in model.types)


#: A neutral current this small is taken as good enough to stop searching (common practice: a
#: fraction of an ampere does not change a neutral conductor or its heating).
NEUTRAL_SETTLED_A = 0.5

#: At or below this many movable breakers the exact solver always runs to a proven optimum
#: (it takes well under a second there), so small panels get the exact answer.
EXACT_BREAKERS = 14


@dataclass(frozen=True)
class _Outcome:
    starts: tuple[tuple[int, ...], ...]
    bound: float  # proven lower bound on the objective (max-phase VA or neutral A)
    moves_minimal: bool  # the fewest moves among arrangements within tolerance, proven by the solver
    solver: str
    note: str = ""


def _solve(model: PlacementModel, options: BalanceOptions) -> _Outcome:
    """Best objective under ``max_moves``, then the fewest moves within ``tolerance_pct`` of it.

    1. Steepest descent from the present arrangement (:func:`solve_heuristic`): the best value
       it reaches, and its fewest-moves state within tolerance of that value.
    2. For max-phase, when that best value is within ``mip_gap_pct`` of
       :func:`phase_va_lower_bound` (or, failing that, of :func:`assignment_lower_bound`) and the
       panel is not small, that certificate is enough: stop — unless ``fewest_moves`` asks for
       step B below anyway.
    3. Otherwise the exact solver (when importable): step A minimises the objective (to
       ``mip_gap_pct``, or to optimality at ≤ EXACT_BREAKERS breakers), step B minimises moves
       with the objective capped at (best value) × (1 + tolerance_pct / 100).  An exact answer
       replaces the search's only when it is better, so this never makes a proposal worse.
    """
    objective = options.objective
    heur = solve_heuristic(
        model,
        objective,
        max_moves=options.max_moves,
        tolerance_pct=options.tolerance_pct,
        time_limit_s=options.time_limit_s,
    )
    chosen = heur.starts
    best_value = heur.best_value if heur.best_value is not None else objective_value(model, chosen, objective)
    bound = phase_va_lower_bound(model) if objective == Objective.MAX_PHASE else 0.0
    small = model.total_breakers <= EXACT_BREAKERS
    name = "heuristic"
    if options.solver == Solver.HEURISTIC:
        return _Outcome(chosen, bound, False, name)
    if objective == Objective.MAX_PHASE:
        certified = best_value <= bound * (1.0 + options.mip_gap_pct / 100.0) + 1e-6
        if not certified:
            relaxed = assignment_lower_bound(model, best_value)
            if relaxed is not None:
                bound = max(bound, relaxed)
                certified = best_value <= bound * (1.0 + options.mip_gap_pct / 100.0) + 1e-6
    else:
        certified = best_value <= NEUTRAL_SETTLED_A
    if certified and not small and options.solver == Solver.AUTO and not options.fewest_moves:
        return _Outcome(chosen, bound, False, name)
    try:
        from . import balance_milp as milp
    except ImportError:
        if options.solver == Solver.MILP:
            raise
        return _Outcome(chosen, bound, False, name)
    try:
        return _solve_exact(milp, model, options, chosen, best_value, bound, certified, small)
    except (ArithmeticError, RuntimeError, ValueError, MemoryError) as exc:
        # the search's answer stands on its own; say why the exact step is missing
        return _Outcome(
            chosen, bound, False, name, f"exact solver unavailable for this panel ({exc}); search result shown"
        )


def _solve_exact(
    milp: ModuleType,
    model: PlacementModel,
    options: BalanceOptions,
    chosen: tuple[tuple[int, ...], ...],
    best_value: float,
    bound: float,
    certified: bool,
    small: bool,
) -> _Outcome:
    """Steps A and B of :func:`_solve` on the exact solver."""
    objective = options.objective
    name = "heuristic+milp"
    scale = max(1.0, bound, best_value)
    # skip step A when the search already meets the bound, or is certified and only step B is wanted
    skip_a = best_value <= bound + 1e-9 * scale or (certified and not small and options.solver == Solver.AUTO)
    if not skip_a:
        step_a = milp.solve(
            model,
            objective,
            max_moves=options.max_moves,
            time_limit_s=options.time_limit_s,
            rel_gap=1e-9 if small else options.mip_gap_pct / 100.0,
            # a hair of weight on moves steers step A towards arrangements near the present one
            move_weight=0.0 if small else 1e-5 * scale / max(1, model.total_breakers),
            # near zero amps a relative gap never closes: an offset makes it about NEUTRAL_SETTLED_A
            objective_offset=(
                NEUTRAL_SETTLED_A / max(options.mip_gap_pct / 100.0, 1e-6)
                if objective == Objective.NEUTRAL and not small
                else 0.0
            ),
        )
        if step_a.dual_bound is not None:
            bound = max(bound, step_a.dual_bound)
        if step_a.starts:
            value_a = objective_value(model, step_a.starts, objective)
            if value_a < best_value - 1e-9 * scale:
                best_value = value_a
                if objective_value(model, chosen, objective) > best_value * (1.0 + options.tolerance_pct / 100.0):
                    chosen = step_a.starts
    bound = min(bound, best_value)
    cap = best_value * (1.0 + options.tolerance_pct / 100.0) + 1e-7 * scale
    moves_minimal = kept_count(model, chosen) == model.total_breakers
    if not moves_minimal:
        step_b = milp.solve(model, objective, max_moves=options.max_moves, cap=cap, time_limit_s=options.time_limit_s)
        if step_b.starts and objective_value(model, step_b.starts, objective) <= cap:
            if kept_count(model, step_b.starts) >= kept_count(model, chosen):
                chosen = step_b.starts
            moves_minimal = step_b.optimal
    return _Outcome(chosen, bound, moves_minimal, name)


# --------------------------------------------------------------------------- public entry points


def balance_panel(
    panel: Panel,
    options: BalanceOptions = BalanceOptions(),
    *,
    feeds_va: Mapping[str, float | FeedLoad] | None = None,
    include_future: bool = False,
) -> BalanceProposal:
    """Propose moves that balance ``panel``.  Pure: the input is not changed.

    ``feeds_va`` gives the VA of each sub-feed circuit by the tag it feeds (0 when absent; use
    :func:`balance_panel_in_project` to have it computed).  ``options.include_future`` overrides
    ``include_future`` when set.  Raises :class:`ProjectFileError` if the panel itself breaks a
    project-file rule.
    """
    from .projectfile import check_panel

    problems: list[Problem] = []
    check_panel(panel, problems)
    if problems:
        raise ProjectFileError(problems)
    if options.max_moves is not None and options.max_moves < 0:
        raise ProjectFileError([Problem("max_moves must be 0 or more", panel.tag, field="max_moves")])
    if options.tolerance_pct < 0:
        raise ProjectFileError([Problem("tolerance_pct must be 0 or more", panel.tag, field="tolerance_pct")])
    future = include_future if options.include_future is None else options.include_future
    feeds = dict(feeds_va or {})
    spec = _spec(panel)
    model = build_model(panel, options, future, feeds)
    notes: list[str] = []
    if len(spec.phases) == 1:
        notes.append(f"{spec.name} has one line: there is nothing to balance")
    if spec.kind == SystemKind.HIGH_LEG:
        notes.append("1-pole breakers are kept off the high leg (B rows)")
    if any(c.feeds and c.feeds not in feeds for c in panel.circuits):
        notes.append("sub-feed loads not given are taken as 0 VA")

    outcome = _solve(model, options)
    if outcome.note:
        notes.append(outcome.note)
    moves = _realise(panel, model, outcome.starts)
    proposed = apply_moves(panel, moves)
    before = panel_loading(panel, include_future=future, feeds_va=feeds)
    after = panel_loading(proposed, include_future=future, feeds_va=feeds)
    lb_va = phase_va_lower_bound(model)
    lb_neutral: float | None = None
    if options.objective == Objective.MAX_PHASE:
        lb_va = max(lb_va, outcome.bound)
        achieved, lb = after.max_phase_va, lb_va
    else:
        lb_neutral = max(0.0, outcome.bound)
        achieved, lb = after.neutral_amps or 0.0, lb_neutral
    lb_va = min(lb_va, after.max_phase_va)  # solver tolerance never lifts a bound above an achieved value
    gap: float | None
    if lb > 1e-9:
        gap = max(0.0, (achieved - lb) / lb * 100.0)
    else:
        gap = 0.0 if achieved <= 1e-6 else None
    return BalanceProposal(
        panel_tag=panel.tag,
        system=panel.system,
        options=options,
        before=before,
        after=after,
        moves=moves,
        breaker_moves=sum(1 for m in moves if not _is_space_at(panel, m.from_slot)),
        lower_bound_va=lb_va,
        lower_bound_neutral_amps=lb_neutral,
        gap_pct=gap,
        proven_optimal=gap is not None and gap <= 1e-3,
        moves_minimal=outcome.moves_minimal,
        solver=outcome.solver,
        panel=proposed,
        notes=tuple(notes),
    )


def _is_space_at(panel: Panel, slot: int) -> bool:
    c = panel.circuit_at(slot)
    return c is not None and c.is_space


def balance_panel_in_project(project: Project, tag: str, options: BalanceOptions = BalanceOptions()) -> BalanceProposal:
    """:func:`balance_panel` for panel ``tag`` of ``project``, with sub-feed loads computed."""
    panel = project.panel(tag)
    if panel is None:
        known = ", ".join(p.tag for p in project.panels) or "none"
        raise ProjectFileError([Problem(f"no panel with tag {tag!r} (panels: {known})", tag, field="tag")])
    future = project.project.include_future if options.include_future is None else options.include_future
    return balance_panel(panel, options, feeds_va=feeds_va_map(project, panel, future), include_future=future)


# --------------------------------------------------------------------------- transformer rotation

ROTATIONS = (0, 1, 2)


def rotate_phase_va(phase_va: Mapping[str, float], rotation: int) -> dict[str, float]:
    """Phase VA as seen upstream when the panel's feeder is landed rotated by ``rotation`` steps.

    Rotation r lands the panel's phase A on upstream phase index r (A→B for r=1), B on r+1, C on
    r+2 — a cyclic relabelling, so the phase sequence (and motor rotation direction) is kept.
    """
    order = ("A", "B", "C")
    out = dict.fromkeys(order, 0.0)
    for i, p in enumerate(order):
        out[order[(i + rotation) % 3]] += phase_va.get(p, 0.0)
    return out


def best_rotations(
    loads: Sequence[Mapping[str, float]], rotatable: Sequence[bool], fixed: Mapping[str, float] | None = None
) -> tuple[tuple[int, ...], float]:
    """Rotation per panel minimising the largest summed phase VA.  Exhaustive up to 3^10, else coordinate descent.

    Returns (rotations, the resulting largest phase VA).  Non-rotatable panels get 0.
    """
    base = dict(fixed or {})
    free = [i for i, r in enumerate(rotatable) if r]

    def total(rots: Sequence[int]) -> float:
        acc = {p: base.get(p, 0.0) for p in ("A", "B", "C")}
        for load, r in zip(loads, rots, strict=True):
            for p, x in rotate_phase_va(load, r).items():
                acc[p] += x
        return max(acc.values())

    rots = [0] * len(loads)
    best = total(rots)
    if len(free) <= 10:
        best_rots = list(rots)
        for combo in itertools.product(ROTATIONS, repeat=len(free)):
            for i, r in zip(free, combo, strict=True):
                rots[i] = r
            value = total(rots)
            if value < best - 1e-9:
                best, best_rots = value, list(rots)
        return tuple(best_rots), best
    improved = True
    while improved:
        improved = False
        for i in free:
            for r in ROTATIONS:
                old = rots[i]
                rots[i] = r
                value = total(rots)
                if value < best - 1e-9:
                    best, improved = value, True
                else:
                    rots[i] = old
    return tuple(rots), best


@dataclass(frozen=True)
class PanelRotation:
    panel_tag: str
    rotatable: bool
    rotation: int  # absolute: panel phase A lands on transformer phase index `rotation`
    feeder_rotation: int  # relative to the panel feeding it: what the installer lands differently
    own_phase_va_before: dict[str, float]
    own_phase_va_after: dict[str, float]


@dataclass(frozen=True)
class TransformerBalanceProposal:
    transformer_tag: str
    secondary: str
    before_phase_va: dict[str, float]
    after_phase_va: dict[str, float]
    rotations: tuple[PanelRotation, ...]
    panels: tuple[BalanceProposal, ...]
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, object]:
        return {
            "transformer": self.transformer_tag,
            "secondary": self.secondary,
            "before": {"phase_va": {k: round(v, 1) for k, v in self.before_phase_va.items()}},
            "after": {"phase_va": {k: round(v, 1) for k, v in self.after_phase_va.items()}},
            "rotations": [
                {
                    "panel": r.panel_tag,
                    "rotatable": r.rotatable,
                    "rotation": r.rotation,
                    "feeder_rotation": r.feeder_rotation,
                    "feeder_landing": rotation_landing(r.feeder_rotation),
                }
                for r in self.rotations
            ],
            "panels": [p.to_json() for p in self.panels],
            "notes": list(self.notes),
        }

    def applied_panels(self) -> tuple[Panel, ...]:
        """Each panel with its in-panel moves applied and its proposed ``feeder_rotation`` set
        (what a project written with this proposal holds)."""
        rotation = {r.panel_tag: r.feeder_rotation for r in self.rotations if r.rotatable}
        return tuple(
            replace(p.panel, feeder_rotation=rotation.get(p.panel_tag, p.panel.feeder_rotation)) for p in self.panels
        )


def rotation_landing(rotation: int) -> str:
    """Installer's words for a rotation: which upstream terminal each panel phase lands on."""
    order = ("A", "B", "C")
    return ", ".join(f"{p}→{order[(i + rotation) % 3]}" for i, p in enumerate(order))


def _secondary_panels(project: Project, xfmr_tag: str) -> list[tuple[Panel, str | None]]:
    """Panels on the transformer's secondary (down to the next transformer), each with its feeding panel."""
    out: list[tuple[Panel, str | None]] = []
    stack: list[tuple[Panel, str | None]] = [(p, None) for p in _panels_fed_from(project, xfmr_tag)]
    seen: set[str] = set()
    while stack:
        panel, parent = stack.pop(0)
        if panel.tag in seen:
            continue
        seen.add(panel.tag)
        out.append((panel, parent))
        for c in panel.circuits:
            child = project.panel(c.feeds) if c.feeds else None
            if child is not None:
                stack.append((child, panel.tag))
    return out


def secondary_panel_tags(project: Project, xfmr_tag: str) -> tuple[str, ...]:
    """Tags of the panels on transformer ``xfmr_tag``'s secondary (down to the next transformer),
    from the transformer down: the panels a transformer proposal may change."""
    return tuple(p.tag for p, _parent in _secondary_panels(project, xfmr_tag))


def _own_phase_va(project: Project, panel: Panel, include_future: bool) -> dict[str, float]:
    """Phase VA of a panel's own circuits; feeders of panels on the same secondary are left out
    (their load is counted in those panels, rotated by their own rotation)."""
    spec = _spec(panel)
    feeds = feeds_va_map(project, panel, include_future)
    out = dict.fromkeys(spec.phases, 0.0)
    for c in panel.circuits:
        if c.feeds and project.panel(c.feeds) is not None:
            continue
        va = circuit_load_va(c, include_future, feeds)
        for p, x in _placement_phase_va(spec, c.slot, max(c.poles, 1), va).items():
            out[p] += x
    return out


def balance_transformer(
    project: Project, tag: str, options: BalanceOptions = BalanceOptions()
) -> TransformerBalanceProposal:
    """Balance the secondary of transformer ``tag``.

    Assumption (stated in every proposal's notes): a three-phase panel without a high leg, fed by
    its own three-pole feeder from the transformer secondary or from a distribution panel on it,
    may have its feeder conductors landed in any cyclic rotation (A→B→C), which relabels its
    phases and keeps the phase sequence.  A high-leg panel cannot be rotated (its high leg is
    fixed by the transformer's tapped winding), nor a single-phase one.

    Steps: (1) balance inside each panel on the secondary, sub-panels before the panels feeding
    them (the options apply per panel); (2)
    choose, for each rotatable panel, the absolute rotation minimising the transformer's largest
    phase VA (exhaustive over 3^k for k ≤ 10 rotatable panels).  Each panel's feeder rotation is
    its absolute rotation minus its feeding panel's.
    """
    xfmr = project.transformer(tag)
    if xfmr is None:
        known = ", ".join(t.tag for t in project.transformers) or "none"
        raise ProjectFileError([Problem(f"no transformer with tag {tag!r} (transformers: {known})", tag, field="tag")])
    future = project.project.include_future if options.include_future is None else options.include_future
    spec = SYSTEMS.get(xfmr.secondary)
    members = _secondary_panels(project, tag)
    if not members:
        raise ProjectFileError([Problem("feeds no panel: there is nothing to balance", tag, field="tag")])
    rotatable_system = spec is not None and len(spec.phases) == 3 and spec.kind != SystemKind.HIGH_LEG

    proposals: list[BalanceProposal] = []
    current = project
    from .projectfile import replace_panel

    # downstream panels first, so a distribution panel is balanced against what its (already
    # balanced) sub-panels present; proposals are then listed from the transformer down
    by_tag: dict[str, BalanceProposal] = {}
    for panel, _parent in reversed(members):
        prop = balance_panel_in_project(current, panel.tag, options)
        by_tag[panel.tag] = prop
        current = replace_panel(current, prop.panel)
    proposals.extend(by_tag[panel.tag] for panel, _parent in members)

    phases = spec.phases if spec else ("A",)
    # The rotations as landed now (each feeder_rotation is relative to the feeding panel; a panel
    # fed straight from the transformer is relative to the transformer): absolute per panel.
    existing: dict[str, int] = {}
    for p, parent in members:  # parents come before their sub-panels
        existing[p.tag] = (p.feeder_rotation + (existing.get(parent, 0) if parent else 0)) % 3
    before_loads = [_own_phase_va(project, p, future) for p, _ in members]
    after_loads = [_own_phase_va(current, current.panel(p.tag) or p, future) for p, _ in members]
    rotatable = [rotatable_system for _ in members]
    if rotatable_system:
        rots, _ = best_rotations(after_loads, rotatable)
    else:
        rots = tuple(0 for _ in members)

    def summed(loads: Sequence[Mapping[str, float]], rs: Sequence[int]) -> dict[str, float]:
        acc = dict.fromkeys(phases, 0.0)
        for load, r in zip(loads, rs, strict=True):
            rotated = rotate_phase_va(load, r) if len(phases) == 3 else dict(load)
            for p in phases:
                acc[p] += rotated.get(p, 0.0)
        return acc

    absolute = {p.tag: r for (p, _), r in zip(members, rots, strict=True)}
    rotations = tuple(
        PanelRotation(
            panel_tag=p.tag,
            rotatable=rotatable_system,
            rotation=absolute[p.tag],
            feeder_rotation=(absolute[p.tag] - (absolute[parent] if parent else 0)) % 3,
            own_phase_va_before=before_loads[i],
            own_phase_va_after=after_loads[i],
        )
        for i, (p, parent) in enumerate(members)
    )
    notes = [
        "a three-phase panel fed by its own feeder may have its feeder landed in a cyclic rotation "
        "(A→B→C), which relabels its phases and keeps the phase sequence; high-leg and single-phase "
        "panels are never rotated",
        "each feeder rotation is relative to the panel feeding it (the installer's landing); applying the "
        "proposal stores it as the panel's feeder_rotation",
    ]
    return TransformerBalanceProposal(
        transformer_tag=tag,
        secondary=xfmr.secondary,
        before_phase_va=summed(before_loads, [existing[p.tag] for p, _ in members]),
        after_phase_va=summed(after_loads, rots),
        rotations=rotations,
        panels=tuple(proposals),
        notes=tuple(notes),
    )


__all__ = [
    "BalanceOptions",
    "BalanceProposal",
    "FeedLoad",
    "Move",
    "Objective",
    "PanelRotation",
    "PhaseLoading",
    "PlacementModel",
    "PlacementSolution",
    "PlacementType",
    "Solver",
    "TransformerBalanceProposal",
    "apply_moves",
    "balance_panel",
    "balance_panel_in_project",
    "balance_transformer",
    "best_rotations",
    "assignment_lower_bound",
    "build_model",
    "feeds_va_map",
    "inverse_moves",
    "panel_loading",
    "phase_va_lower_bound",
    "presented_load",
    "rotation_landing",
    "solve_heuristic",
    "rotate_phase_va",
    "secondary_panel_tags",
    "subtree_va",
]
