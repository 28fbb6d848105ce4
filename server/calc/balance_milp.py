"""Exact solver of the phase balancer: a mixed-integer programme solved by HiGHS (scipy.optimize.milp).

Role: the one module of the balancer that needs numpy/scipy; :mod:`server.calc.balance` builds
the :class:`~server.calc.balance.PlacementModel` and imports this module lazily.

Formulation (phase-per-slot assignment with interchangeable breakers merged into types):

* y[t,k] ∈ {0,1}: a breaker of type t has its first slot at start k (k among the type's
  feasible starts: inside the region, on its side when sides are kept, off the high leg for
  1-pole).  Breakers of one type are interchangeable for the objective, so merging them removes
  the symmetry that makes per-breaker formulations slow.
* Σ_k y[t,k] = n_t (every breaker placed); for each slot s: Σ_{t,k covering s} y[t,k] ≤ 1.
* Phase load L_p = F_p + Σ a[t,k,p]·y[t,k] (trade convention VA).
* max-phase: minimise z subject to L_p ≤ z.
* neutral: I_N = F_N + Σ i[t,k]·y[t,k] (phasor); minimise w subject to
  Re(I_N·e^{−jθ_d}) ≤ w for d = 0..D−1, θ_d = 2πd/D.  Then w ≤ |I_N| for every arrangement
  (a projection never exceeds the length), so the optimum w* is a proven lower bound on the
  least neutral current, and the arrangement found has |I_N| ≤ w*/cos(π/D).
* kept = Σ_t Σ_{k ∈ original starts of t} y[t,k] counts breakers that stay (a type keeping one
  of its original starts keeps one of its breakers there); moves = N − kept.
  max_moves: kept ≥ N − max_moves.  The moves step fixes the objective ≤ cap and maximises kept.

The dual bound HiGHS proves (``mip_dual_bound``) is returned as the objective bound.
"""

from __future__ import annotations

import contextlib
import math
import os
import sys
import threading
from collections.abc import Iterator

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import coo_matrix

from .balance import NEUTRAL_DIRECTIONS, Objective, PlacementModel, PlacementSolution


def solve(
    model: PlacementModel,
    objective: Objective,
    *,
    max_moves: int | None = None,
    cap: float | None = None,
    time_limit_s: float = 20.0,
    rel_gap: float = 1e-7,
    move_weight: float = 0.0,
    objective_offset: float = 0.0,
) -> PlacementSolution:
    """Solve the placement.  ``cap`` set: keep the objective ≤ cap and minimise moves instead.

    Returns the chosen starts per type; an empty ``starts`` when HiGHS found no solution in time.
    ``objective_offset`` adds a constant to the objective so that HiGHS's relative gap test acts
    as an absolute tolerance of about ``rel_gap × offset`` near zero (used for the neutral).
    """
    spec_phase = _slot_phase_of(model)
    use_neutral = objective == Objective.NEUTRAL
    n_phase = len(model.phases)

    # ---- variables
    # kind "y": multi-pole type ti at start s; kind "u": 1-pole type ti count in cell; kind "k": kept in cell
    kinds: list[tuple[str, int, object]] = []
    y_vars: dict[tuple[int, int], int] = {}
    u_vars: dict[tuple[int, tuple[int, int]], int] = {}
    k_vars: dict[tuple[int, tuple[int, int]], int] = {}
    cells: dict[tuple[int, int], list[int]] = {}  # (phase index, side 1=left 0=right) -> region slots
    for s in model.region:
        cells.setdefault((spec_phase[s], s % 2), []).append(s)
    one_pole = [ti for ti, t in enumerate(model.types) if t.poles == 1]
    multi = [ti for ti, t in enumerate(model.types) if t.poles > 1]
    for ti in multi:
        for s in model.types[ti].starts:
            y_vars[(ti, s)] = len(kinds)
            kinds.append(("y", ti, s))
    for ti in one_pole:
        t = model.types[ti]
        allowed = sorted({(spec_phase[s], s % 2) for s in t.starts})
        for cell in allowed:
            u_vars[(ti, cell)] = len(kinds)
            kinds.append(("u", ti, cell))
            if any((spec_phase[o], o % 2) == cell for o in t.original_starts):
                k_vars[(ti, cell)] = len(kinds)
                kinds.append(("k", ti, cell))
    if not kinds:
        return PlacementSolution(tuple(() for _ in model.types), None, True)
    z_var = len(kinds)
    one_var = z_var + 1  # fixed at 1: carries the objective offset
    n_var = z_var + 2

    rows: list[int] = []
    cols: list[int] = []
    vals: list[float] = []
    lo: list[float] = []
    hi: list[float] = []

    def add_row(entries: list[tuple[int, float]], lower: float, upper: float) -> None:
        r = len(lo)
        for c, v in entries:
            rows.append(r)
            cols.append(c)
            vals.append(v)
        lo.append(lower)
        hi.append(upper)

    # every breaker placed
    for ti, t in enumerate(model.types):
        if t.poles > 1:
            entries = [(y_vars[(ti, s)], 1.0) for s in t.starts]
        else:
            entries = [(v, 1.0) for (tj, _c), v in u_vars.items() if tj == ti]
        add_row(entries, float(len(t.members)), float(len(t.members)))
    # multi-pole occupancy per slot
    cover: dict[int, list[int]] = {}
    for (ti, s), v in y_vars.items():
        for x in model.covered(model.types[ti], s):
            cover.setdefault(x, []).append(v)
    for x in sorted(cover):
        if len(cover[x]) > 1:
            add_row([(v, 1.0) for v in cover[x]], -np.inf, 1.0)
    # cell capacity: 1-pole count + multi-pole slots in the cell <= region slots in the cell
    for cell, slots in cells.items():
        entries = [(v, 1.0) for (ti, c), v in u_vars.items() if c == cell]
        if not entries:
            continue
        counts: dict[int, float] = {}
        for x in slots:
            for v in cover.get(x, ()):
                counts[v] = counts.get(v, 0.0) + 1.0
        add_row(entries + list(counts.items()), -np.inf, float(len(slots)))
    # kept 1-pole breakers: k <= u and k <= originals in the cell not covered by a multi-pole breaker
    for (ti, cell), kv in k_vars.items():
        t = model.types[ti]
        origs = [o for o in t.original_starts if (spec_phase[o], o % 2) == cell]
        add_row([(kv, 1.0), (u_vars[(ti, cell)], -1.0)], -np.inf, 0.0)
        entries: dict[int, float] = {kv: 1.0}
        for o in origs:
            for v in cover.get(o, ()):
                entries[v] = entries.get(v, 0.0) + 1.0
        add_row(list(entries.items()), -np.inf, float(len(origs)))

    # objective rows: per phase VA, or per direction neutral projection
    def contribution(v: int, weight_of) -> float:
        kind, ti, where = kinds[v]
        t = model.types[ti]
        if kind == "y":
            return weight_of(t, t.starts.index(where))
        if kind == "u":
            # any start of the type in this cell has the same contribution
            for j, s in enumerate(t.starts):
                if (spec_phase[s], s % 2) == where:
                    return weight_of(t, j)
        return 0.0

    obj_rows: list[tuple[list[tuple[int, float]], float]] = []
    load_vars = [v for v, (kind, _ti, _w) in enumerate(kinds) if kind != "k"]
    if not use_neutral:
        for p in range(n_phase):
            entries = []
            for v in load_vars:
                a = contribution(v, lambda t, j, p=p: t.phase_va[j][p])
                if a:
                    entries.append((v, a))
            obj_rows.append((entries, model.fixed_phase_va[p]))
    else:
        for d in range(NEUTRAL_DIRECTIONS):
            theta = 2.0 * math.pi * d / NEUTRAL_DIRECTIONS
            rot = complex(math.cos(theta), -math.sin(theta))
            entries = []
            for v in load_vars:
                a = contribution(v, lambda t, j, rot=rot: (t.neutral_a[j] * rot).real)
                if a:
                    entries.append((v, a))
            obj_rows.append((entries, (model.fixed_neutral_a * rot).real))
    for entries, const in obj_rows:
        if cap is None:
            add_row([*entries, (z_var, -1.0)], -np.inf, -const)
        else:
            add_row(entries, -np.inf, cap - const)

    kept_entries = [(v, 1.0) for v in k_vars.values()]
    for ti in multi:
        t = model.types[ti]
        for o in set(t.original_starts):
            if (ti, o) in y_vars:
                kept_entries.append((y_vars[(ti, o)], 1.0))
    if max_moves is not None:
        add_row(kept_entries, float(model.total_breakers - max_moves), np.inf)

    c = np.zeros(n_var)
    if cap is None:
        c[z_var] = 1.0
        c[one_var] = objective_offset
        for v, _w in kept_entries:
            c[v] = -move_weight
    else:
        for v, _w in kept_entries:
            c[v] = -1.0
    integrality = np.ones(n_var)
    integrality[z_var] = 0
    integrality[one_var] = 0
    lower = np.zeros(n_var)
    upper = np.ones(n_var)
    lower_one = 1.0
    for (ti, _cell), v in u_vars.items():
        upper[v] = float(len(model.types[ti].members))
    for (ti, _cell), v in k_vars.items():
        integrality[v] = 0  # integral at the optimum: min of two integers
        upper[v] = float(len(model.types[ti].members))
    if cap is None:
        upper[z_var] = np.inf
        lower[z_var] = 0.0 if use_neutral else -np.inf
    else:
        upper[z_var] = 0.0
    lower[one_var] = lower_one
    a_matrix = coo_matrix((vals, (rows, cols)), shape=(len(lo), n_var)).tocsr()
    with _quiet_stdout():
        res = milp(
            c,
            constraints=[LinearConstraint(a_matrix, np.array(lo), np.array(hi))],
            integrality=integrality,
            bounds=Bounds(lower, upper),
            options={"time_limit": max(0.1, time_limit_s), "mip_rel_gap": rel_gap, "disp": False},
        )
    if res.x is None:
        return PlacementSolution((), None, False)
    starts = _realise_starts(model, kinds, res.x, spec_phase)
    if starts is None:
        return PlacementSolution((), None, False)
    bound = getattr(res, "mip_dual_bound", None)
    dual = None
    if cap is None and bound is not None and math.isfinite(bound):
        # HiGHS proves the bound to its feasibility tolerance; give a hair back so it stays a bound
        dual = float(bound) - objective_offset
        dual -= 1e-7 * max(1.0, abs(dual))
    return PlacementSolution(starts, dual, res.status == 0)


_STDOUT_LOCK = threading.Lock()

#: Silence file descriptor 1 while HiGHS runs (see :func:`_quiet_stdout`).  A long-running server
#: whose own logs go to stdout may set this False: HiGHS's stray lines then reach its log instead.
QUIET_STDOUT = True


@contextlib.contextmanager
def _quiet_stdout() -> Iterator[None]:
    """Silence file descriptor 1 while HiGHS runs.

    HiGHS 1.12 prints some diagnostics from C++ straight to stdout even with output off; that
    would corrupt ``panelwright balance --json``.  Python-level output is flushed first.
    """
    if not QUIET_STDOUT:
        yield
        return
    with _STDOUT_LOCK:
        try:
            sys.stdout.flush()
            saved = os.dup(1)
        except (OSError, ValueError, AttributeError):
            yield
            return
        try:
            devnull = os.open(os.devnull, os.O_WRONLY)
            try:
                os.dup2(devnull, 1)
            finally:
                os.close(devnull)
            yield
        finally:
            os.dup2(saved, 1)
            os.close(saved)


def _slot_phase_of(model: PlacementModel) -> dict[int, int]:
    """Phase index of every region slot, read from the model's own placements (row-cyclic)."""
    n = len(model.phases)
    return {s: ((s + 1) // 2 - 1) % n for s in model.region}


def _realise_starts(model: PlacementModel, kinds, x, spec_phase) -> tuple[tuple[int, ...], ...] | None:
    chosen: list[list[int]] = [[] for _ in model.types]
    covered: set[int] = set()
    counts: dict[tuple[int, tuple[int, int]], int] = {}
    for v, (kind, ti, where) in enumerate(kinds):
        if kind == "y" and x[v] > 0.5:
            chosen[ti].append(where)
            covered.update(model.covered(model.types[ti], where))
        elif kind == "u":
            n = int(round(x[v]))
            if n:
                counts[(ti, where)] = n
    free: dict[tuple[int, int], list[int]] = {}
    for s in model.region:
        if s not in covered:
            free.setdefault((spec_phase[s], s % 2), []).append(s)
    # keepers first: a 1-pole breaker stays where its original slot is still free in its cell
    used: set[int] = set()
    for (ti, cell), n in sorted(counts.items()):
        t = model.types[ti]
        for o in sorted(t.original_starts):
            if n == 0:
                break
            if (spec_phase[o], o % 2) == cell and o not in covered and o not in used:
                chosen[ti].append(o)
                used.add(o)
                n -= 1
        counts[(ti, cell)] = n
    for (ti, cell), n in sorted(counts.items()):
        pool = [s for s in free.get(cell, []) if s not in used]
        if len(pool) < n:
            return None
        for s in pool[:n]:
            chosen[ti].append(s)
            used.add(s)
    out = tuple(tuple(sorted(c)) for c in chosen)
    if any(len(c) != len(t.members) for c, t in zip(out, model.types, strict=True)):
        return None
    return out
