"""User management (admin only): list, add, change role, set password, remove."""

from __future__ import annotations

from dataclasses import dataclass, field

from fastapi import APIRouter, Depends, Request
from fastapi.concurrency import run_in_threadpool
from fastapi.responses import RedirectResponse, Response

from server.auth.accounts import AccountError, UserInfo, add_user, list_users, remove_user, set_password, set_role
from server.auth.permissions import Require
from server.auth.roles import Permission, Role
from server.web.deps import FormDep, TemplatesDep
from server.web.views import Page

router = APIRouter(prefix="/admin/users", tags=["users"])
ADMIN = [Depends(Require(Permission.ADMIN))]


@dataclass(frozen=True)
class UsersContext:
    """The account list with the add form (values kept and the message shown after a refusal)."""

    page: Page
    users: list[UserInfo]
    roles: tuple[str, ...] = tuple(r.value for r in Role)
    values: dict[str, str] = field(default_factory=dict)
    error: str = ""
    done: str = ""


def _sessions(request: Request):
    return request.app.state.auth.sessions


def _page(request: Request, templates: TemplatesDep, *, values=None, error="", done="", status=200) -> Response:
    ctx = UsersContext(Page("Users"), list_users(_sessions(request)), values=values or {}, error=error, done=done)
    return templates.TemplateResponse(request, "users/list.html", {"ctx": ctx, "page": ctx.page}, status_code=status)


@router.get("", name="users", dependencies=ADMIN)
def users(request: Request, templates: TemplatesDep, done: str = "") -> Response:
    return _page(request, templates, done=done)


@router.post("", name="user_add", dependencies=ADMIN)
async def user_add(request: Request, templates: TemplatesDep, form: FormDep) -> Response:
    try:
        user = await run_in_threadpool(
            add_user,
            _sessions(request),
            name=form.get("name") or "",
            role=form.get("role") or "",
            password=form.get("password") or "",
        )
    except AccountError as exc:
        values = {"name": form.get("name") or "", "role": form.get("role") or ""}
        return _page(request, templates, values=values, error=str(exc), status=422)
    return RedirectResponse(f"/admin/users?done=added+{user.name}", status_code=303)


@router.post("/{name}", name="user_update", dependencies=ADMIN)
async def user_update(request: Request, name: str, templates: TemplatesDep, form: FormDep) -> Response:
    """One form per user: ``action`` is ``role`` (with ``role``), ``password`` (with ``password``) or ``remove``."""
    action = form.get("action") or ""
    sessions = _sessions(request)
    try:
        if action == "role":
            await run_in_threadpool(set_role, sessions, name=name, role=form.get("role") or "")
        elif action == "password":
            await run_in_threadpool(set_password, sessions, name=name, password=form.get("password") or "")
        elif action == "remove":
            await run_in_threadpool(remove_user, sessions, name=name)
        else:
            raise AccountError(f"unknown action {action!r}: role, password or remove")
    except AccountError as exc:
        return _page(request, templates, error=str(exc), status=422)
    return RedirectResponse(f"/admin/users?done={action}+{name}", status_code=303)
