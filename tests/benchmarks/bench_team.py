"""Team benchmark: 20 signed-in users editing different panels of the 500-panel project for 30 s.

Run ``.venv/bin/python -m tests.benchmarks.bench_team [SECONDS]`` (or ``pytest tests/benchmarks/bench_team.py -s``).
uvicorn serves the app in a subprocess on 127.0.0.1 (SQLite in WAL mode; PostgreSQL too when
``PANELWRIGHT_TEST_PG_URL`` is set).  Each user signs in, opens its panels, then loops: edit a
circuit's VA (sending the row version, as the grid does), and every fifth time reload the
panel page.  The floor is the same 20 threads posting to the bare endpoint of
tests/benchmarks/bench_web.py (``PANELWRIGHT_BENCH_ENDPOINTS=1``: write one row, constant
fragment) for the same time, on the same server.  It prints throughput and p95 of both and
their ratios; no absolute time is asserted.
"""

from __future__ import annotations

import os
import statistics
import sys
import tempfile
import threading
import time
import uuid
from pathlib import Path

import httpx

from server.calc.projectfile import dump_project
from server.config import Settings
from server.db import migrate
from server.services import Services
from tests.benchmarks.generate import generate_project
from tests.integration.team.live import LiveServer, TeamUser, add_users

USERS = 20
SECONDS = 30.0


def _pct(values: list[float], q: float) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, max(0, round(q * (len(ordered) - 1))))]


def _prepare(url: str) -> tuple[int, dict[str, list[tuple[int, float]]], list[int]]:
    migrate.upgrade(url)
    svc = Services.from_settings(Settings(database_url=url))
    t0 = time.perf_counter()
    pid = svc.create_project(dump_project(generate_project()))
    snap = svc.snapshot(pid)
    print(f"  project stored and computed in {time.perf_counter() - t0:.1f} s")
    targets = {
        p.tag: [
            (c.slot, float(c.va))
            for c in p.circuits
            if c.feeds is None and c.poles > 0 and c.va and c.category and c.category.value != "spare"
        ]
        for p in snap.model.panels
    }
    from sqlalchemy import select

    from server.db.models import Circuit, Panel

    with svc.sessions() as s:
        ids = list(
            s.scalars(select(Circuit.id).join(Panel).where(Panel.project_id == pid).order_by(Circuit.id).limit(USERS))
        )
    svc.sessions.kw["bind"].dispose()
    return pid, {t: v for t, v in targets.items() if v}, ids


def _run_phase(base: str, names: list[str], body, seconds: float) -> tuple[list[float], int]:
    """Run ``body(user, i, deadline, latencies, errors)`` in one thread per user after all signed in."""
    latencies: list[list[float]] = [[] for _ in names]
    errors = [0]
    users = [TeamUser(base, n) for n in names]
    for u in users:
        u.sign_in()
    ready = threading.Barrier(len(users))

    def work(i: int) -> None:
        ready.wait()
        deadline = time.monotonic() + seconds
        while time.monotonic() < deadline:
            try:
                body(users[i], i, deadline, latencies[i], errors)
            except httpx.HTTPError as exc:  # e.g. a read timeout: counted, and the user carries on
                errors[0] += 1
                print(f"  {names[i]}: {type(exc).__name__} {exc}", file=sys.stderr)

    threads = [threading.Thread(target=work, args=(i,)) for i in range(len(users))]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=seconds + 120)
    for u in users:
        u.close()
    return [x for lat in latencies for x in lat], errors[0]


def run_backend(url: str, seconds: float) -> dict[str, float]:
    pid, targets, floor_ids = _prepare(url)
    names = [f"bench{i:02d}" for i in range(USERS)]
    add_users(url, names)
    tags = sorted(targets)

    def mix(user: TeamUser, i: int, deadline: float, lat: list[float], errors: list[int]) -> None:
        mine = tags[i::USERS]
        for tag in mine[:3]:
            user.open_panel(pid, tag)
        plan = [(tag, slot, va) for tag in mine[:3] for slot, va in targets[tag]]
        n = 0
        while time.monotonic() < deadline:
            tag, slot, va = plan[n % len(plan)]
            t = time.perf_counter()
            r = user.edit(pid, tag, slot, "va", f"{va + 1 + n:g}")
            lat.append(time.perf_counter() - t)
            errors[0] += r.status_code != 200
            n += 1
            if n % 5 == 0:
                t = time.perf_counter()
                r = user.open_panel(pid, tag)
                lat.append(time.perf_counter() - t)
                errors[0] += r.status_code != 200

    def floor(user: TeamUser, i: int, deadline: float, lat: list[float], errors: list[int]) -> None:
        n = 0
        while time.monotonic() < deadline:
            t = time.perf_counter()
            r = user.client.post(f"/bench/touch/{floor_ids[i % len(floor_ids)]}", data={"notes": f"n{n}"})
            lat.append(time.perf_counter() - t)
            errors[0] += r.status_code != 200
            n += 1

    with (
        tempfile.TemporaryDirectory() as tmp,
        LiveServer(url, bench_endpoints=True, log=Path(tmp) / "server.log") as server,
    ):
        warm = TeamUser(server.base, names[0])
        warm.sign_in()
        t0 = time.perf_counter()
        warm.open_panel(pid, tags[0])  # the server computes the whole project once
        print(f"  first page (full compute in the server) {time.perf_counter() - t0:.1f} s")
        warm.close()
        mix_lat, mix_err = _run_phase(server.base, names, mix, seconds)
        floor_lat, floor_err = _run_phase(server.base, names, floor, seconds)
    out = {
        "mix_rps": len(mix_lat) / seconds,
        "mix_p50_ms": statistics.median(mix_lat) * 1000,
        "mix_p95_ms": _pct(mix_lat, 0.95) * 1000,
        "mix_errors": float(mix_err),
        "floor_rps": len(floor_lat) / seconds,
        "floor_p50_ms": statistics.median(floor_lat) * 1000,
        "floor_p95_ms": _pct(floor_lat, 0.95) * 1000,
        "floor_errors": float(floor_err),
    }
    out["throughput_ratio"] = out["mix_rps"] / out["floor_rps"]
    out["p95_ratio"] = out["mix_p95_ms"] / out["floor_p95_ms"]
    return out


def report(name: str, r: dict[str, float]) -> None:
    print(f"{name}: {USERS} users")
    print(
        f"  mix (edit + every 5th a page read): {r['mix_rps']:.1f} req/s, p50 {r['mix_p50_ms']:.1f} ms, "
        f"p95 {r['mix_p95_ms']:.1f} ms, non-200 or failed: {r['mix_errors']:.0f}"
    )
    print(
        f"  floor (bare one-row write):         {r['floor_rps']:.1f} req/s, p50 {r['floor_p50_ms']:.1f} ms, "
        f"p95 {r['floor_p95_ms']:.1f} ms, non-200 or failed: {r['floor_errors']:.0f}"
    )
    print(f"  ratio mix/floor: throughput {r['throughput_ratio']:.2f}x, p95 {r['p95_ratio']:.2f}x")


def _pg_database(base: str):
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    name = f"panelwright_bench_{uuid.uuid4().hex[:10]}"
    admin = create_engine(base, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    return admin, name, make_url(base).set(database=name).render_as_string(hide_password=False)


def main(seconds: float = SECONDS) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        print("SQLite (WAL):")
        report("SQLite", run_backend(f"sqlite:///{Path(tmp) / 'bench.db'}", seconds))
    base = os.environ.get("PANELWRIGHT_TEST_PG_URL")
    if base:
        from sqlalchemy import text

        admin, name, url = _pg_database(base)
        try:
            print("PostgreSQL:")
            report("PostgreSQL", run_backend(url, seconds))
        finally:
            with admin.connect() as conn:
                conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
            admin.dispose()
    else:
        print("PostgreSQL: skipped (set PANELWRIGHT_TEST_PG_URL)")


def test_bench_team() -> None:
    main()


if __name__ == "__main__":
    main(float(sys.argv[1]) if len(sys.argv) > 1 else SECONDS)
