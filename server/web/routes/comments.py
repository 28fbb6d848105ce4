"""Review comments on a panel: the thread (read), add (comment), resolve (comment; author, engineer or admin).

The thread is a fragment for htmx (the panel page loads it) and a page of its own without
htmx.  Adding answers with the thread again (htmx) or a redirect to the panel page; a bad
comment is answered 422 with the message naming the field and the typed text kept.  The
project's open comments have their own page, linked from the Warnings page.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated

from fastapi import APIRouter, Depends, HTTPException, Request
from fastapi.responses import RedirectResponse, Response

from server import comments
from server.auth.accounts import UserInfo
from server.auth.permissions import Require
from server.auth.roles import Permission, allows
from server.services import NotFound, Snapshot
from server.web.deps import FormDep, HtmxDep, ServicesDep, TemplatesDep
from server.web.views import Page, page

router = APIRouter(tags=["comments"])

THREAD = "/projects/{pid}/panels/{tag}/comments"
Reader = Annotated[UserInfo | None, Depends(Require(Permission.READ))]
Commenter = Annotated[UserInfo | None, Depends(Require(Permission.COMMENT))]


@dataclass(frozen=True)
class ThreadContext:
    """A panel's comments, whether this user may write, and the form's values and error after a bad submit."""

    page: Page
    pid: int
    tag: str
    spaces: int
    lines: list[comments.CommentLine]
    can_comment: bool
    user: UserInfo | None
    values: dict[str, str]
    error: str = ""
    error_field: str = ""

    def may_resolve(self, line: comments.CommentLine) -> bool:
        return self.user is not None and self.can_comment and comments.may_resolve(self.user, line)


def _panel(snap: Snapshot, tag: str):
    panel = snap.model.panel(tag)
    if panel is None:
        raise NotFound(f"project {snap.info.number or snap.project_id} has no panel {tag}")
    return panel


def _thread(
    request: Request,
    svc,
    templates,
    pid: int,
    tag: str,
    user: UserInfo | None,
    htmx: bool,
    *,
    values: dict[str, str] | None = None,
    error: comments.CommentRejected | None = None,
    status: int = 200,
) -> Response:
    snap = svc.snapshot(pid)
    panel = _panel(snap, tag)
    ctx = ThreadContext(
        page(snap, f"Comments on panel {tag}", "comments"),
        pid,
        tag,
        panel.spaces,
        comments.for_panel(svc.sessions, project_id=pid, panel_tag=tag),
        user is not None and allows(user.role, Permission.COMMENT),
        user,
        values or {},
        str(error) if error else "",
        error.field if error else "",
    )
    name = "comments/_thread.html" if htmx else "comments/thread.html"
    return templates.TemplateResponse(request, name, {"ctx": ctx, "page": ctx.page}, status_code=status)


@router.get(THREAD, name="comments")
def show_thread(
    request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep, user: Reader
) -> Response:
    return _thread(request, svc, templates, pid, tag, user, htmx)


@router.post(THREAD, name="comment_add")
def add_comment(
    request: Request,
    pid: int,
    tag: str,
    svc: ServicesDep,
    templates: TemplatesDep,
    htmx: HtmxDep,
    form: FormDep,
    user: Commenter,
) -> Response:
    assert user is not None  # Require(COMMENT) refuses anonymous requests
    panel = _panel(svc.snapshot(pid), tag)
    values = {"body": str(form.get("body", "")), "slot": str(form.get("slot", ""))}
    try:
        slot = comments.parse_slot(values["slot"], panel.spaces, tag)
        comments.add(svc.sessions, project_id=pid, panel_tag=tag, slot=slot, user=user, body=values["body"])
    except comments.CommentRejected as exc:
        return _thread(request, svc, templates, pid, tag, user, htmx, values=values, error=exc, status=422)
    if htmx:
        return _thread(request, svc, templates, pid, tag, user, htmx)
    return RedirectResponse(request.url_for("panel", pid=pid, tag=tag).path + "#comments", status_code=303)


@router.post("/projects/{pid}/comments/{comment_id}/resolve", name="comment_resolve")
def resolve_comment(
    request: Request,
    pid: int,
    comment_id: int,
    svc: ServicesDep,
    templates: TemplatesDep,
    htmx: HtmxDep,
    user: Commenter,
) -> Response:
    assert user is not None
    svc.snapshot(pid)  # 404 for a project that does not exist
    try:
        line = comments.resolve(svc.sessions, project_id=pid, comment_id=comment_id, user=user)
    except comments.NotAllowed as exc:
        raise HTTPException(403, str(exc)) from None
    if line is None:
        raise NotFound(f"project {pid} has no comment {comment_id}")
    if htmx:
        return _thread(request, svc, templates, pid, line.panel_tag, user, htmx)
    return RedirectResponse(request.url_for("panel", pid=pid, tag=line.panel_tag).path + "#comments", status_code=303)


@router.get("/projects/{pid}/comments", name="open_comments")
def open_comments(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep, _user: Reader) -> Response:
    snap = svc.snapshot(pid)
    lines = comments.open_in_project(svc.sessions, project_id=pid)
    return templates.TemplateResponse(
        request,
        "comments/open.html",
        {"page": page(snap, "Open comments", "warnings"), "lines": lines, "pid": pid},
    )
