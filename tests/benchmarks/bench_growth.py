"""Growth benchmark: headroom of every node, and a what-if preview, against the engine's full compute.

Run ``.venv/bin/python -m tests.benchmarks.bench_growth``.  On the generated 500-panel project
(tests/benchmarks/generate.py) it prints, against a floor measured in the same run (never an
absolute time as pass/fail):

* :func:`server.calc.headroom.compute_headroom` over every panel and transformer ÷ the full
  engine compute it reads (target ≤ 0.25×: headroom must not cost more than a recompute);
* a what-if preview (best slot + a full recompute of the project with the load added) ÷ the
  full compute (expected ≈ 1×: the recompute dominates);
* the growth chart of one node (matplotlib SVG) in milliseconds, for the record.

Times are the best of several repetitions (the least disturbed by other processes).
"""

from __future__ import annotations

import time

from server.calc.engine import compute_project
from server.calc.headroom import compute_headroom
from server.calc.model import Category
from server.calc.whatif import AddedLoad, preview
from server.charts import GrowthChartData, growth_chart_svg
from tests.benchmarks.generate import generate_project

REPEATS = 5


def best_of(fn, repeats: int = REPEATS) -> float:
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    project = generate_project()
    result = compute_project(project)
    full = best_of(lambda: compute_project(project))
    heads = compute_headroom(project, result)
    head = best_of(lambda: compute_headroom(project, result))
    bindings: dict[str, int] = {}
    for h in heads.values():
        bindings[h.binding.value] = bindings.get(h.binding.value, 0) + 1
    # A panel with a free slot for a 1-pole load.
    tag = next(t for t, h in heads.items() if h.kind == "panel" and (h.poles_available or 0) > 0)
    req = AddedLoad(tag, 1_500.0, Category.RECEPTACLE, 1)
    whatif = best_of(lambda: preview(project, result, req), 3)
    data = GrowthChartData(
        tag,
        ("Rev 1", "Rev 2", "Rev 3", "Working copy"),
        (50, 55, 58, 60),
        (40, 44, 45, 47),
        (42, 47, 48, 52),
        (53, 58, 60, 63),
        (55, 61, 62, 69),
        "225 A bus",
    )
    chart = best_of(lambda: growth_chart_svg(data), 3)
    n_circuits = sum(len(p.circuits) for p in project.panels)
    print(f"project: {len(project.panels)} panels, {len(project.transformers)} transformers, {n_circuits} circuits")
    print(f"full engine compute (floor):    {full * 1000:8.2f} ms")
    print(
        f"headroom of {len(heads)} nodes:       {head * 1000:8.2f} ms  = {head / full:5.3f} × full compute (target ≤ 0.25×)"
    )
    print(f"what-if preview on {tag}:   {whatif * 1000:8.2f} ms  = {whatif / full:5.2f} × full compute")
    print(f"growth chart (matplotlib SVG):  {chart * 1000:8.2f} ms")
    print("binding limits: " + ", ".join(f"{k} {v}" for k, v in sorted(bindings.items(), key=lambda kv: -kv[1])))


if __name__ == "__main__":
    main()
