"""The benchmark floor (only with PANELWRIGHT_BENCH_ENDPOINTS=1): write one row, answer a constant fragment.

tests/benchmarks/bench_web.py times a circuit edit against this endpoint of the same app, so
the ratio shows what validation, recompute and rendering add on top of a bare write.
"""

from __future__ import annotations

from fastapi import APIRouter
from fastapi.responses import HTMLResponse

from server.web.deps import FormDep, ServicesDep

router = APIRouter(prefix="/bench", tags=["bench"], include_in_schema=False)

FRAGMENT = '<td id="bench-cell" hx-swap-oob="true">saved</td>'


@router.post("/touch/{circuit_id}")
def touch(circuit_id: int, svc: ServicesDep, form: FormDep) -> HTMLResponse:
    svc.touch_circuit_notes(circuit_id, form.get("notes", ""))
    return HTMLResponse(FRAGMENT)
