"""server.calc stays pure: importing every one of its modules pulls in no web, database,
template or validation framework (checked in a fresh interpreter, so nothing else has
imported them first)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[3]
FORBIDDEN = ("fastapi", "sqlalchemy", "jinja2", "starlette", "pydantic")

_PROBE = """
import importlib, json, pkgutil, sys
import server.calc as calc
names = ["server.calc"]
for info in pkgutil.walk_packages(calc.__path__, "server.calc."):
    importlib.import_module(info.name)
    names.append(info.name)
loaded = sorted({m.split(".")[0] for m in sys.modules})
print(json.dumps({"modules": names, "top": loaded}))
"""


def test_importing_server_calc_loads_no_framework() -> None:
    proc = subprocess.run(
        [sys.executable, "-c", _PROBE], cwd=ROOT, capture_output=True, text=True, timeout=120, check=False
    )
    assert proc.returncode == 0, proc.stderr
    report = json.loads(proc.stdout.strip().splitlines()[-1])
    # The probe really imported the engine and its helpers.
    for name in ("server.calc.engine", "server.calc.loads", "server.calc.projectfile", "server.calc.tables"):
        assert name in report["modules"]
    leaked = sorted(set(FORBIDDEN) & set(report["top"]))
    assert not leaked, f"server.calc imports {leaked}"
