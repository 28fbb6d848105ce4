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


def test_the_engine_itself_is_standard_library_only() -> None:
    # numpy/scipy are allowed only in a separate module that needs them (the balancer's solver);
    # the engine, the loads and the project-file parser must not pull them in.
    probe = (
        "import json, sys\n"
        "import server.calc.engine, server.calc.loads, server.calc.projectfile\n"
        "print(json.dumps(sorted({m.split('.')[0] for m in sys.modules})))\n"
    )
    proc = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    top = set(json.loads(proc.stdout.strip().splitlines()[-1]))
    assert "server" in top
    assert not top & {"numpy", "scipy", *FORBIDDEN}
