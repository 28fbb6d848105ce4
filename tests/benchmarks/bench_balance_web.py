"""Benchmark of balancing in the panel editor: apply / undo as one edit, against a one-circuit edit.

Run ``.venv/bin/python -m tests.benchmarks.bench_balance_web`` (or ``pytest tests/benchmarks/bench_balance_web.py -s``).
On a temporary SQLite database holding the generated 500-panel project (tests/benchmarks/generate.py)
it times, at the service level (no HTTP), interleaved so drift affects all alike:

* apply: :func:`server.balancing.rearrange` of a balancer proposal for one 42-circuit panel
  (fingerprint check, rule check, lift-and-set-down slot updates, one audit row, the project's
  results brought up to date), then its undo;
* the floor: one circuit edit through :meth:`server.services.Services.edit_circuit` (one row,
  incremental recompute) on the same project;
* for the record, the preview (the balancer itself) once per panel.

It prints medians and the ratios apply/floor and undo/floor.  No absolute time is asserted.
"""

from __future__ import annotations

import statistics
import tempfile
import time
from pathlib import Path

from server import balancing
from server.calc.balance import BalanceOptions, inverse_moves
from server.calc.projectfile import dump_project
from server.config import Settings
from server.db import migrate
from server.services import Services
from tests.benchmarks.generate import generate_project

ROUNDS = 8


def run(rounds: int = ROUNDS) -> dict[str, float]:
    with tempfile.TemporaryDirectory() as tmp:
        url = f"sqlite:///{Path(tmp) / 'bench.db'}"
        migrate.upgrade(url)
        svc = Services.from_settings(Settings(database_url=url))
        project = generate_project()
        pid = svc.create_project(dump_project(project))
        snap = svc.snapshot(pid)
        # Panels with something to move, each balanced once (the preview's cost, for the record).
        previews: list[balancing.BalancePreview] = []
        preview_ms: list[float] = []
        for panel in snap.model.panels:
            if len(previews) == rounds:
                break
            t = time.perf_counter()
            pv = balancing.preview(svc, pid, panel.tag, BalanceOptions(time_limit_s=2.0))
            preview_ms.append((time.perf_counter() - t) * 1000.0)
            if pv.proposal.moves:
                previews.append(pv)
        load = next(
            (p.tag, c.slot, c.va or 0.0)
            for p in snap.model.panels
            for c in p.circuits
            if c.feeds is None and c.poles > 0 and c.va is not None and p.tag not in {pv.tag for pv in previews}
        )
        apply_ms: list[float] = []
        undo_ms: list[float] = []
        floor_ms: list[float] = []
        moved = 0
        for i, pv in enumerate(previews):
            t = time.perf_counter()
            done = balancing.rearrange(svc, pid, pv.tag, pv.proposal.moves, expected_fingerprint=pv.fingerprint)
            apply_ms.append((time.perf_counter() - t) * 1000.0)
            moved += done.breakers_moved
            t = time.perf_counter()
            svc.edit_circuit(pid, load[0], load[1], {"va": str(load[2] + i + 1)})
            floor_ms.append((time.perf_counter() - t) * 1000.0)
            t = time.perf_counter()
            balancing.rearrange(
                svc,
                pid,
                pv.tag,
                inverse_moves(done.moves),
                expected_fingerprint=done.fingerprint,
                action=balancing.ACTION_UNDO,
            )
            undo_ms.append((time.perf_counter() - t) * 1000.0)
            t = time.perf_counter()
            svc.edit_circuit(pid, load[0], load[1], {"va": str(load[2])})
            floor_ms.append((time.perf_counter() - t) * 1000.0)
        svc.sessions.kw["bind"].dispose()
    out = {
        "panels": float(len(previews)),
        "breakers_moved_mean": moved / max(len(previews), 1),
        "apply_p50_ms": statistics.median(apply_ms),
        "undo_p50_ms": statistics.median(undo_ms),
        "floor_p50_ms": statistics.median(floor_ms),
        "preview_p50_ms": statistics.median(preview_ms),
    }
    out["ratio_apply"] = out["apply_p50_ms"] / out["floor_p50_ms"]
    out["ratio_undo"] = out["undo_p50_ms"] / out["floor_p50_ms"]
    return out


def report(r: dict[str, float]) -> None:
    print(f"{r['panels']:.0f} panels balanced, {r['breakers_moved_mean']:.1f} breakers moved on average")
    print(f"apply (one edit, one audit row, results up to date): p50 {r['apply_p50_ms']:.1f} ms")
    print(f"undo:                                                 p50 {r['undo_p50_ms']:.1f} ms")
    print(f"floor (one circuit edit, incremental recompute):     p50 {r['floor_p50_ms']:.1f} ms")
    print(f"ratio apply/floor {r['ratio_apply']:.2f}x, undo/floor {r['ratio_undo']:.2f}x")
    print(f"for the record, preview (the balancer on one panel): p50 {r['preview_p50_ms']:.0f} ms")


def test_bench_balance_web() -> None:
    report(run())


if __name__ == "__main__":
    report(run())
