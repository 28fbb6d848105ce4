"""The change history of a project or of one panel: filter by user, panel and dates; export as CSV."""

from __future__ import annotations

from dataclasses import dataclass

from fastapi import APIRouter, Depends, Request
from fastapi.responses import Response

from server import audit
from server.auth.permissions import Require
from server.auth.roles import Permission
from server.services import NotFound
from server.web.deps import ServicesDep, TemplatesDep
from server.web.views import Page, page

router = APIRouter(tags=["history"])
READ = [Depends(Require(Permission.READ))]
LIMIT = 500


@dataclass(frozen=True)
class HistoryContext:
    """Changes newest first (at most ``limit``), the filters as typed, and the choices for them."""

    page: Page
    lines: list[audit.AuditLine]
    filters: dict[str, str]
    users: list[str]
    panels: list[str]
    error: str
    csv_url: str
    limit: int
    panel_scope: str = ""  # set on a panel's own history page


def _filter(user: str, panel: str, since: str, until: str) -> tuple[audit.AuditFilter, str]:
    try:
        return audit.AuditFilter(
            user.strip(), panel.strip(), audit.parse_day(since, "from"), audit.parse_day(until, "to")
        ), ""
    except ValueError as exc:
        return audit.AuditFilter(user.strip(), panel.strip()), str(exc)


def _render(
    request: Request, svc, templates, pid: int, panel_scope: str, user: str, panel: str, since: str, until: str
) -> Response:
    snap = svc.snapshot(pid)
    if panel_scope and snap.model.panel(panel_scope) is None:
        raise NotFound(f"project {snap.info.number or pid} has no panel {panel_scope}")
    filt, error = _filter(user, panel_scope or panel, since, until)
    lines = audit.events(svc.sessions, project_id=pid, filt=filt, limit=LIMIT)
    query = request.url.query
    base = f"/projects/{pid}/panels/{panel_scope}/history.csv" if panel_scope else f"/projects/{pid}/history.csv"
    title = f"History of panel {panel_scope}" if panel_scope else "History"
    ctx = HistoryContext(
        page(snap, title, "history"),
        lines,
        {"user": user, "panel": panel_scope or panel, "since": since, "until": until},
        audit.users_in(svc.sessions, project_id=pid),
        [p.tag for p in snap.model.panels],
        error,
        base + (f"?{query}" if query else ""),
        LIMIT,
        panel_scope,
    )
    return templates.TemplateResponse(
        request, "history/list.html", {"ctx": ctx, "page": ctx.page}, status_code=422 if error else 200
    )


def _csv(svc, pid: int, panel_scope: str, user: str, panel: str, since: str, until: str) -> Response:
    snap = svc.snapshot(pid)
    filt, error = _filter(user, panel_scope or panel, since, until)
    if error:
        return Response(error + "\n", status_code=422, media_type="text/plain")
    lines = audit.events(svc.sessions, project_id=pid, filt=filt, limit=0)
    name = (snap.info.number or f"project-{pid}").replace("/", "-") + (f"-{panel_scope}" if panel_scope else "")
    return Response(
        audit.to_csv(lines),
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="{name}-history.csv"'},
    )


@router.get("/projects/{pid}/history", name="history", dependencies=READ)
def project_history(
    request: Request,
    pid: int,
    svc: ServicesDep,
    templates: TemplatesDep,
    user: str = "",
    panel: str = "",
    since: str = "",
    until: str = "",
) -> Response:
    return _render(request, svc, templates, pid, "", user, panel, since, until)


@router.get("/projects/{pid}/history.csv", name="history_csv", dependencies=READ)
def project_history_csv(
    pid: int, svc: ServicesDep, user: str = "", panel: str = "", since: str = "", until: str = ""
) -> Response:
    return _csv(svc, pid, "", user, panel, since, until)


@router.get("/projects/{pid}/panels/{tag}/history", name="panel_history", dependencies=READ)
def panel_history(
    request: Request,
    pid: int,
    tag: str,
    svc: ServicesDep,
    templates: TemplatesDep,
    user: str = "",
    since: str = "",
    until: str = "",
) -> Response:
    return _render(request, svc, templates, pid, tag, user, "", since, until)


@router.get("/projects/{pid}/panels/{tag}/history.csv", name="panel_history_csv", dependencies=READ)
def panel_history_csv(
    pid: int, tag: str, svc: ServicesDep, user: str = "", since: str = "", until: str = ""
) -> Response:
    return _csv(svc, pid, tag, user, "", since, until)
