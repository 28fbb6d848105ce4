"""The change history: of a project or of one panel (filter by user, panel and dates), and, for
admins, of what belongs to no project — accounts and firm settings (filter by user, kind and
dates, a page at a time).  Every list can be exported as CSV; all read :func:`server.audit.events`
with :func:`server.audit.parse_filter` and write :func:`server.audit.to_csv`."""

from __future__ import annotations

from dataclasses import dataclass
from urllib.parse import urlencode

from fastapi import APIRouter, Depends, Query, Request
from fastapi.responses import Response

from server import audit
from server.auth.permissions import Require
from server.auth.roles import Permission
from server.services import NotFound
from server.web.deps import ServicesDep, TemplatesDep
from server.web.views import Page, page

router = APIRouter(tags=["history"])
READ = [Depends(Require(Permission.READ))]
ADMIN = [Depends(Require(Permission.ADMIN))]
#: Changes per page of a project's (or a panel's) history.
LIMIT = 500
#: Changes per page of the accounts-and-settings history.
SITE_PAGE_SIZE = 100
SITE_TITLE = "Accounts and settings history"


@dataclass(frozen=True)
class Pager:
    """Which page of a long list is shown, with links to its neighbours (empty when none)."""

    number: int
    pages: int
    total: int
    prev_url: str = ""
    next_url: str = ""


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
    kinds: tuple[str, ...] = ()  # the "What" filter's choices (the accounts-and-settings history)
    pager: Pager | None = None  # set when the list is shown a page at a time
    intro: str = ""


def _filter(user: str, panel: str, since: str, until: str) -> tuple[audit.AuditFilter, str]:
    return audit.parse_filter(user, panel, since, until)


def _csv_response(lines: list[audit.AuditLine], name: str) -> Response:
    return Response(
        audit.to_csv(lines),
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="{name}-history.csv"'},
    )


def _render(
    request: Request,
    svc,
    templates,
    pid: int,
    panel_scope: str,
    user: str,
    panel: str,
    since: str,
    until: str,
    page_no: str = "1",
) -> Response:
    snap = svc.snapshot(pid)
    if panel_scope and snap.model.panel(panel_scope) is None:
        raise NotFound(f"project {snap.info.number or pid} has no panel {panel_scope}")
    filt, error = _filter(user, panel_scope or panel, since, until)
    number, page_error = _page_number(page_no)
    error = error or page_error
    total = audit.count(svc.sessions, project_id=pid, filt=filt)
    pager = _pager(request, number, total, LIMIT)
    lines = audit.events(svc.sessions, project_id=pid, filt=filt, limit=LIMIT, offset=(pager.number - 1) * LIMIT)
    query = urlencode([(k, v) for k, v in request.query_params.multi_items() if k != "page"])
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
        pager=pager,
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
    return _csv_response(lines, name)


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
    page_no: str = Query("1", alias="page"),
) -> Response:
    return _render(request, svc, templates, pid, "", user, panel, since, until, page_no)


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
    page_no: str = Query("1", alias="page"),
) -> Response:
    return _render(request, svc, templates, pid, tag, user, "", since, until, page_no)


@router.get("/projects/{pid}/panels/{tag}/history.csv", name="panel_history_csv", dependencies=READ)
def panel_history_csv(
    pid: int, tag: str, svc: ServicesDep, user: str = "", since: str = "", until: str = ""
) -> Response:
    return _csv(svc, pid, tag, user, "", since, until)


# --------------------------------------------------------------------------- accounts and firm settings (admin)


def _page_number(text: str) -> tuple[int, str]:
    try:
        number = int(text.strip() or "1")
    except ValueError:
        return 1, f"page: {text!r} is not a page number (1, 2, …)"
    return (number, "") if number >= 1 else (1, f"page: {text!r} is not a page number (1, 2, …)")


def _site_filter(user: str, what: str, since: str, until: str) -> tuple[audit.AuditFilter, str]:
    return audit.parse_filter(user, "", since, until, what, kinds=audit.SITE_KINDS)


def _pager(request: Request, number: int, total: int, size: int) -> Pager:
    """Page ``number`` (kept within the pages there are) of ``total`` rows, ``size`` a page."""
    pages = max(1, -(-total // size))
    number = min(number, pages)
    return Pager(
        number,
        pages,
        total,
        _with_page(request, number - 1) if number > 1 else "",
        _with_page(request, number + 1) if number < pages else "",
    )


def _with_page(request: Request, number: int) -> str:
    query = [(k, v) for k, v in request.query_params.multi_items() if k != "page"] + [("page", str(number))]
    return f"{request.url.path}?{urlencode(query)}"


@router.get("/admin/history", name="site_history", dependencies=ADMIN)
def site_history(
    request: Request,
    svc: ServicesDep,
    templates: TemplatesDep,
    user: str = "",
    what: str = "",
    since: str = "",
    until: str = "",
    page_no: str = Query("1", alias="page"),
) -> Response:
    """The changes that belong to no project (accounts, firm settings), newest first, a page at a time."""
    filt, error = _site_filter(user, what, since, until)
    number, page_error = _page_number(page_no)
    error = error or page_error
    total = audit.count(svc.sessions, project_id=None, site=True, filt=filt)
    pager = _pager(request, number, total, SITE_PAGE_SIZE)
    lines = audit.events(
        svc.sessions,
        project_id=None,
        site=True,
        filt=filt,
        limit=SITE_PAGE_SIZE,
        offset=(pager.number - 1) * SITE_PAGE_SIZE,
    )
    query = urlencode([(k, v) for k, v in request.query_params.multi_items() if k != "page"])
    ctx = HistoryContext(
        Page(SITE_TITLE),
        lines,
        {"user": user, "what": what, "since": since, "until": until, "panel": ""},
        audit.users_in(svc.sessions, project_id=None, site=True),
        [],
        error,
        "/admin/history.csv" + (f"?{query}" if query else ""),
        SITE_PAGE_SIZE,
        kinds=audit.SITE_KINDS,
        pager=pager,
        intro="Changes that belong to no project: user accounts (added, role changed, password set, removed) "
        "and the firm settings, each with who made it and the values before and after. Passwords are never "
        "recorded, only that one was set. Sign-ins are not recorded. A project's own changes are on its "
        "History tab.",
    )
    return templates.TemplateResponse(
        request, "history/list.html", {"ctx": ctx, "page": ctx.page}, status_code=422 if error else 200
    )


@router.get("/admin/history.csv", name="site_history_csv", dependencies=ADMIN)
def site_history_csv(svc: ServicesDep, user: str = "", what: str = "", since: str = "", until: str = "") -> Response:
    """Every matching change (no paging), the same columns as a project's CSV."""
    filt, error = _site_filter(user, what, since, until)
    if error:
        return Response(error + "\n", status_code=422, media_type="text/plain")
    return _csv_response(
        audit.events(svc.sessions, project_id=None, site=True, filt=filt, limit=0), "accounts-settings"
    )
