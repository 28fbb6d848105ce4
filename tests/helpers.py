"""Shared test helpers: tolerance-aware assertions and the demo project path."""

from __future__ import annotations

import math
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEMO_FILE = ROOT / "seed_demo" / "demo_project.json"


def assert_close(actual: float, expected: float, *, rel: float = 1e-3, abs_: float = 1e-9, what: str = "") -> None:
    """Assert ``actual`` is within ``rel`` (relative) or ``abs_`` (absolute) of ``expected``."""
    if not math.isclose(actual, expected, rel_tol=rel, abs_tol=abs_):
        label = f"{what}: " if what else ""
        raise AssertionError(f"{label}{actual!r} is not within {rel:.2%} of {expected!r}")
