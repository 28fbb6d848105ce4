"""Issued revisions: list and issue, view one (printable), download its frozen file, compare two."""

from __future__ import annotations

import json
from dataclasses import dataclass

from fastapi import APIRouter, Depends, Request
from fastapi.responses import RedirectResponse, Response

from server import revisions as rev
from server.auth.permissions import Require
from server.auth.roles import Permission
from server.web.deps import FormDep, ServicesDep, TemplatesDep
from server.web.views import Page, page

router = APIRouter(tags=["revisions"])
READ = [Depends(Require(Permission.READ))]
ISSUE = [Depends(Require(Permission.ISSUE))]
BASE = "/projects/{pid}/revisions"


@dataclass(frozen=True)
class RevisionListContext:
    """Issued revisions, newest last; whether the viewer may issue; the message of a refused issue."""

    page: Page
    revisions: list[rev.RevisionSummary]
    may_issue: bool
    error: str = ""


@dataclass(frozen=True)
class RevisionContext:
    """One frozen revision: its summary, the panels of the frozen file with their frozen demand load."""

    page: Page
    revision: rev.IssuedRevision
    panels: list[dict]


@dataclass(frozen=True)
class CompareContext:
    page: Page
    comparison: rev.Comparison
    choices: list[str]


def _may_issue(request: Request) -> bool:
    from server.auth.roles import allows

    user = getattr(request.state, "user", None)
    return allows(user.role if user else None, Permission.ISSUE)


@router.get(BASE, name="revisions", dependencies=READ)
def list_revisions(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    snap = svc.snapshot(pid)
    ctx = RevisionListContext(page(snap, "Revisions", "revisions"), rev.list_revisions(svc, pid), _may_issue(request))
    return templates.TemplateResponse(request, "revisions/list.html", {"ctx": ctx, "page": ctx.page})


@router.post(BASE, name="revision_issue", dependencies=ISSUE)
def issue_revision(request: Request, pid: int, svc: ServicesDep, form: FormDep) -> Response:
    user = request.state.user
    number = rev.issue(svc, pid, description=form.get("description") or "", issued_by=user.name)
    return RedirectResponse(f"/projects/{pid}/revisions/{number}", status_code=303)


@router.get(BASE + "/compare", name="revision_compare", dependencies=READ)
def compare(
    request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep, a: str = "", b: str = rev.CURRENT
) -> Response:
    snap = svc.snapshot(pid)
    numbers = [str(r.number) for r in rev.list_revisions(svc, pid)]
    if not a:
        a = numbers[-1] if numbers else rev.CURRENT
    comparison = rev.compare(svc, pid, a, b)
    title = f"Compare {_label(a)} with {_label(b)}"
    ctx = CompareContext(page(snap, title, "revisions"), comparison, [*numbers, rev.CURRENT])
    return templates.TemplateResponse(request, "revisions/compare.html", {"ctx": ctx, "page": ctx.page})


def _label(which: str) -> str:
    return "the current project" if which == rev.CURRENT else f"revision {which}"


@router.get(BASE + "/{number}", name="revision", dependencies=READ)
def show(request: Request, pid: int, number: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    snap = svc.snapshot(pid)
    r = rev.get(svc, pid, number)
    results = r.results.get("panels", {})
    panels = [
        {
            "tag": p["tag"],
            "system": p.get("system"),
            "circuits": len(p.get("circuits", [])),
            "demand_va": (results.get(p["tag"]) or {}).get("demand_va"),
            "connected_va": (results.get(p["tag"]) or {}).get("connected_va_total"),
        }
        for p in r.project.get("panels", [])
    ]
    ctx = RevisionContext(page(snap, f"Revision {number}", "revisions"), r, panels)
    return templates.TemplateResponse(request, "revisions/detail.html", {"ctx": ctx, "page": ctx.page})


@router.get(BASE + "/{number}/project.json", name="revision_file", dependencies=READ)
def frozen_file(pid: int, number: int, svc: ServicesDep) -> Response:
    r = rev.get(svc, pid, number)
    name = (r.project.get("project", {}).get("number") or f"project-{pid}").replace("/", "-")
    return Response(
        json.dumps(r.project, indent=2, ensure_ascii=False) + "\n",
        media_type="application/json",
        headers={"Content-Disposition": f'attachment; filename="{name}-rev{number}.panelwright.json"'},
    )
