"""Engine benchmark: full and incremental recompute of the generated 500-panel project.

Run ``.venv/bin/python -m tests.benchmarks.bench_engine``.  Prints, against floors measured
in the same run (never absolute times as pass/fail):

* full recompute ÷ a bare Python pass that only sums VA per phase over the same 21 000
  circuits (target ≤ 10×);
* incremental recompute after one circuit edit ÷ full recompute (target ≤ 1/50).

Times are process CPU time (``time.process_time``), the best of several repetitions; the
floor and the full recompute are measured alternately so both see the same machine state.
"""

from __future__ import annotations

import gc
import random
import time
from dataclasses import replace

from server.calc.engine import Calculator, compute_project
from server.calc.model import Project
from server.calc.systems import SYSTEMS, breaker_phases
from tests.benchmarks.generate import generate_project

REPEATS = 7
EDITS = 60
#: CPU time of this process: other processes on a shared machine do not inflate it (wall-clock
#: time, time.perf_counter, swings by a factor of two or more under load).  Both the floor and
#: the engine are measured with the same clock.
CLOCK = time.process_time


def bare_phase_sum(project: Project) -> dict[str, dict[str, float]]:
    """The floor: sum each panel's circuit VA onto its phases (trade convention), nothing else."""
    out: dict[str, dict[str, float]] = {}
    for panel in project.panels:
        spec = SYSTEMS[panel.system]
        acc = dict.fromkeys(spec.phases, 0.0)
        for c in panel.circuits:
            if c.poles == 0 or not c.va:
                continue
            phases = breaker_phases(spec, c.slot, c.poles)
            share = c.va / len(phases)
            for p in phases:
                acc[p] += share
        out[panel.tag] = acc
    return out


def best_of(fn, repeats: int = REPEATS) -> float:
    best = float("inf")
    for _ in range(repeats):
        t0 = CLOCK()
        fn()
        best = min(best, CLOCK() - t0)
    return best


def main() -> None:
    project = generate_project()
    n_circuits = sum(len(p.circuits) for p in project.panels)
    # Floor and full recompute alternate so that both see the same machine load.
    floor = full = float("inf")
    for _ in range(REPEATS):
        floor = min(floor, best_of(lambda: bare_phase_sum(project), 1))
        full = min(full, best_of(lambda: compute_project(project), 1))

    # For the record only: how much of the full recompute is the cyclic garbage collector
    # (the engine allocates one result per circuit; the floor allocates almost nothing).
    gc.collect()
    gc.disable()
    try:
        full_no_gc = best_of(lambda: compute_project(project), 3)
    finally:
        gc.enable()

    calc = Calculator(project)
    rng = random.Random(7)
    times: list[float] = []
    for _ in range(EDITS):
        panel = rng.choice(calc.project.panels)
        loads = [i for i, c in enumerate(panel.circuits) if c.feeds is None and c.poles > 0]
        i = rng.choice(loads)
        circuits = list(panel.circuits)
        circuits[i] = replace(circuits[i], va=round(rng.uniform(100.0, 2_000.0), 1))
        edited = replace(panel, circuits=tuple(circuits))
        # Re-applying the same edit does the same work again; the best of three is the least disturbed.
        times.append(best_of(lambda edited=edited: calc.update_panel(edited), 3))
    times.sort()
    inc_median = times[len(times) // 2]
    inc_worst = times[-1]
    # The incremental result must equal a full recompute of the edited project.
    assert calc.result() == compute_project(calc.project), "incremental result differs from full compute"

    print(f"project: {len(project.panels)} panels, {len(project.transformers)} transformers, {n_circuits} circuits")
    print(f"bare VA-per-phase pass (floor): {floor * 1000:8.2f} ms")
    print(f"full recompute:                 {full * 1000:8.2f} ms  = {full / floor:5.2f} × floor (target ≤ 10×)")
    print(f"  (same with the cyclic GC paused: {full_no_gc * 1000:.2f} ms = {full_no_gc / floor:.2f} × floor)")
    print(
        f"incremental, one circuit edit:  {inc_median * 1000:8.2f} ms median of {EDITS} edits, "
        f"{inc_worst * 1000:.2f} ms worst  = 1/{full / inc_median:.0f} of full (worst 1/{full / inc_worst:.0f}; "
        "target ≤ 1/50)"
    )


if __name__ == "__main__":
    main()
