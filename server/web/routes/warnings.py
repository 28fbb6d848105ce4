"""The project's warnings, most severe first, each linking to its panel and slot."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import Response

from server.web.deps import ServicesDep, TemplatesDep
from server.web.views import WarningsContext, page, severity_counts, warning_lines

router = APIRouter(tags=["warnings"])


@router.get("/projects/{pid}/warnings", name="warnings")
def list_warnings(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    snap = svc.snapshot(pid)
    lines = warning_lines(snap)
    ctx = WarningsContext(page(snap, "Warnings", "warnings"), lines, severity_counts(lines))
    return templates.TemplateResponse(request, "warnings/list.html", {"ctx": ctx, "page": ctx.page})
