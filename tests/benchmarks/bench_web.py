"""Web benchmark: latency of one circuit edit on the generated 500-panel project.

Run ``.venv/bin/python -m tests.benchmarks.bench_web`` (or ``pytest tests/benchmarks/bench_web.py -s``).
The app runs under uvicorn on 127.0.0.1 (a free port) on a temporary SQLite database holding
the project of tests/benchmarks/generate.py (500 panels × 42 circuits).  It times, over real
HTTP with keep-alive:

* the circuit edit an htmx grid sends (validate, write in one transaction, incremental
  recompute, render the cell, per-phase totals, summary and upstream badges), and
* the floor: a bare endpoint of the same app (``PANELWRIGHT_BENCH_ENDPOINTS=1``) that writes
  one row and answers a constant fragment.

It prints p50 and p95 of both and their ratios (target: edit p95 ≤ 2 × floor p95).  The two
kinds of request are interleaved so drift affects both alike.  No absolute time is asserted.
"""

from __future__ import annotations

import random
import re
import statistics
import sys
import tempfile
import time
from pathlib import Path

import httpx

from server.calc.projectfile import dump_project
from server.config import Settings
from server.db import migrate
from server.web.app import create_app
from server.web.serving import prepare_process
from tests.benchmarks.generate import generate_project
from tests.helpers import thread_server

EDITS = 1000  # a p95 from 300 pairs swung by ±0.1 in the ratio between runs; 1000 steadies it
WARMUP = 20
SEED = 7


def _pct(values: list[float], q: float) -> float:
    ordered = sorted(values)
    k = min(len(ordered) - 1, max(0, round(q * (len(ordered) - 1))))
    return ordered[k]


def run(edits: int = EDITS) -> dict[str, float]:
    with tempfile.TemporaryDirectory() as tmp:
        url = f"sqlite:///{Path(tmp) / 'bench.db'}"
        migrate.upgrade(url)
        # single_user: no sign-in on this loopback-only server (ignored where team use is absent).
        settings = Settings(database_url=url, bench_endpoints=True, single_user=True)
        app = create_app(settings)
        prepare_process(settings)  # as `panelwright serve` does before its first request
        svc = app.state.services
        t0 = time.perf_counter()
        project = generate_project()
        pid = svc.create_project(dump_project(project))
        snap = svc.snapshot(pid)  # full compute, fills the calculator cache
        print(
            f"project: {len(project.panels)} panels, {sum(len(p.circuits) for p in project.panels)} circuits "
            f"(stored and computed in {time.perf_counter() - t0:.1f} s)"
        )
        rng = random.Random(SEED)
        # Edits land on load circuits all over the project (deep sub-panels included).
        targets = [
            (p.tag, c.slot, c.va or 0.0)
            for p in snap.model.panels
            for c in p.circuits
            if c.feeds is None and c.poles > 0 and c.va is not None and c.category and c.category.value != "spare"
        ]
        floor_id = svc.first_circuit_id(pid)

        edit_ms: list[float] = []
        floor_ms: list[float] = []
        try:
            with thread_server(app, start_timeout_s=30) as base, httpx.Client(base_url=base, timeout=60) as client:
                headers = {"HX-Request": "true", "HX-Trigger-Name": "va"}
                # Where the app guards writes with a per-session token, send it as the page's htmx does.
                page = client.get(f"/projects/{pid}/panels/{targets[0][0]}").text
                token = re.search(r'<meta name="csrf-token" content="([0-9a-f]+)"', page)
                if token:
                    headers["X-CSRF-Token"] = token.group(1)
                for i in range(edits + WARMUP):
                    tag, slot, va = rng.choice(targets)
                    t = time.perf_counter()
                    r = client.post(
                        f"/projects/{pid}/panels/{tag}/circuits/{slot}",
                        data={"va": f"{va + rng.randint(1, 500)}"},
                        headers=headers,
                    )
                    e = (time.perf_counter() - t) * 1000.0
                    if r.status_code != 200 or "phase-totals" not in r.text:
                        raise SystemExit(f"edit of {tag} slot {slot} failed: {r.status_code} {r.text[:300]}")
                    t = time.perf_counter()
                    r = client.post(f"/bench/touch/{floor_id}", data={"notes": f"n{i}"}, headers=headers)
                    f = (time.perf_counter() - t) * 1000.0
                    if r.status_code != 200:
                        raise SystemExit(f"floor request failed: {r.status_code}")
                    if i >= WARMUP:
                        edit_ms.append(e)
                        floor_ms.append(f)
        finally:
            app.state.engine.dispose()
        after = svc.snapshot(pid)
        assert after.data_version == snap.data_version + edits + WARMUP  # every edit was written

    out = {
        "edit_p50_ms": statistics.median(edit_ms),
        "edit_p95_ms": _pct(edit_ms, 0.95),
        "floor_p50_ms": statistics.median(floor_ms),
        "floor_p95_ms": _pct(floor_ms, 0.95),
    }
    out["ratio_p50"] = out["edit_p50_ms"] / out["floor_p50_ms"]
    out["ratio_p95"] = out["edit_p95_ms"] / out["floor_p95_ms"]
    out.update(_engine_share(project, targets, edits))
    return out


def _engine_share(project, targets, edits: int) -> dict[str, float]:
    """For the record: the engine's incremental recompute alone (no HTTP, no database) on the same kind of edit."""
    from dataclasses import replace

    from server.calc.engine import Calculator

    calc = Calculator(project)
    panels = {p.tag: p for p in project.panels}
    rng = random.Random(SEED + 1)
    times: list[float] = []
    for _ in range(edits):
        tag, slot, va = rng.choice(targets)
        panel = panels[tag]
        circuits = tuple(replace(c, va=va + rng.randint(1, 500)) if c.slot == slot else c for c in panel.circuits)
        panel = panels[tag] = replace(panel, circuits=circuits)
        t = time.perf_counter()
        calc.update_panel(panel)
        times.append((time.perf_counter() - t) * 1000.0)
    return {"engine_p50_ms": statistics.median(times), "engine_p95_ms": _pct(times, 0.95)}


def report(r: dict[str, float]) -> None:
    print(
        f"circuit edit (write + incremental recompute + fragments): p50 {r['edit_p50_ms']:.2f} ms, p95 {r['edit_p95_ms']:.2f} ms"
    )
    print(
        f"floor (write one row + constant fragment):                p50 {r['floor_p50_ms']:.2f} ms, p95 {r['floor_p95_ms']:.2f} ms"
    )
    print(f"ratio edit/floor: p50 {r['ratio_p50']:.2f}x, p95 {r['ratio_p95']:.2f}x (target p95 <= 2x)")
    print(
        f"for the record, Calculator.update_panel alone (no HTTP, no database): "
        f"p50 {r['engine_p50_ms']:.2f} ms, p95 {r['engine_p95_ms']:.2f} ms"
    )


def test_bench_web() -> None:
    report(run())


if __name__ == "__main__":
    report(run(int(sys.argv[1]) if len(sys.argv) > 1 else EDITS))
