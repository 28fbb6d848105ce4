"""Sign in, sign out, and the first-run page (creates the first admin; this machine only).

Failed sign-ins are limited per user name and per address (:mod:`server.auth.ratelimit`);
the message never says whether the name or the password was wrong.  A successful sign-in
always gets a new session token (the old one, signed in or not, is dropped).
"""

from __future__ import annotations

from dataclasses import dataclass

from fastapi import APIRouter, Depends, Request
from fastapi.concurrency import run_in_threadpool
from fastapi.responses import RedirectResponse, Response

from server.auth.accounts import AccountError, add_user, authenticate, count_users, end_session, start_session
from server.auth.middleware import AuthConfig, is_loopback
from server.auth.permissions import Require
from server.auth.roles import Permission, Role
from server.web.deps import FormDep, TemplatesDep
from server.web.views import Page

router = APIRouter(tags=["auth"])
PUBLIC = [Depends(Require(Permission.PUBLIC))]


@dataclass(frozen=True)
class LoginContext:
    """The sign-in form: where to go after, the name typed, and the message of a refused attempt."""

    page: Page
    next: str
    name: str = ""
    error: str = ""
    first_run: bool = False


def safe_next(target: str | None) -> str:
    """Only a path on this server (never ``//host`` or ``http://…``), default the project list."""
    if not target or not target.startswith("/") or target.startswith("//") or "\\" in target:
        return "/"
    return target


def _auth(request: Request) -> AuthConfig:
    return request.app.state.auth


def _login_page(request: Request, templates: TemplatesDep, ctx: LoginContext, status: int = 200) -> Response:
    return templates.TemplateResponse(request, "auth/login.html", {"ctx": ctx, "page": ctx.page}, status_code=status)


@router.get("/login", name="login", dependencies=PUBLIC)
def login_form(request: Request, templates: TemplatesDep, next: str = "/") -> Response:
    cfg = _auth(request)
    if cfg.single_user:
        return RedirectResponse(safe_next(next), status_code=303)
    first = count_users(cfg.sessions) == 0
    return _login_page(request, templates, LoginContext(Page("Sign in"), safe_next(next), first_run=first))


@router.post("/login", name="login_submit", dependencies=PUBLIC)
async def login(request: Request, templates: TemplatesDep, form: FormDep) -> Response:
    cfg = _auth(request)
    name = (form.get("name") or "").strip()
    password = form.get("password") or ""
    target = safe_next(form.get("next"))
    address = request.state.client_address
    wait = cfg.limiter.retry_after(name, address)
    if wait > 0:
        ctx = LoginContext(
            Page("Sign in"), target, name, f"Too many failed sign-ins; try again in {int(wait) + 1} seconds."
        )
        response = _login_page(request, templates, ctx, 429)
        response.headers["Retry-After"] = str(int(wait) + 1)
        return response
    user = await run_in_threadpool(authenticate, cfg.sessions, name=name, password=password)
    if user is None:
        cfg.limiter.failed(name, address)
        return _login_page(
            request, templates, LoginContext(Page("Sign in"), target, name, "Wrong user name or password."), 401
        )
    cfg.limiter.succeeded(name)
    return await _signed_in(request, cfg, user.id, target)


async def _signed_in(request: Request, cfg: AuthConfig, user_id: int, target: str) -> Response:
    old = request.state.session_token
    await run_in_threadpool(end_session, cfg.sessions, token=old)
    token = await run_in_threadpool(
        start_session, cfg.sessions, user_id=user_id, hours=cfg.session_hours, address=request.state.client_address
    )
    response = RedirectResponse(target, status_code=303)
    response.headers.append("set-cookie", cfg.cookie_header(token).decode("latin-1"))
    return response


@router.post("/logout", name="logout", dependencies=PUBLIC)
async def logout(request: Request) -> Response:
    cfg = _auth(request)
    await run_in_threadpool(end_session, cfg.sessions, token=request.state.session_token)
    response = RedirectResponse("/login", status_code=303)
    response.headers.append("set-cookie", cfg.cookie_header(None).decode("latin-1"))
    return response


def _first_run_allowed(request: Request) -> str | None:
    """Why the first-run page is closed, or None when it may be used."""
    cfg = _auth(request)
    if cfg.single_user:
        return "single-user mode has no accounts"
    if not is_loopback(request.state.client_address):
        return "the first-run page works only on the server machine itself (open it at http://127.0.0.1)"
    if count_users(cfg.sessions) > 0:
        return "the first admin already exists; sign in, or ask an admin for an account"
    return None


@router.get("/setup", name="setup", dependencies=PUBLIC)
def setup_form(request: Request, templates: TemplatesDep) -> Response:
    closed = _first_run_allowed(request)
    ctx = {"page": Page("First run"), "closed": closed, "values": {}, "error": ""}
    return templates.TemplateResponse(request, "auth/setup.html", ctx, status_code=403 if closed else 200)


@router.post("/setup", name="setup_submit", dependencies=PUBLIC)
async def setup(request: Request, templates: TemplatesDep, form: FormDep) -> Response:
    closed = _first_run_allowed(request)
    name = (form.get("name") or "").strip()
    error = ""
    if closed is None:
        if (form.get("password") or "") != (form.get("password2") or ""):
            error = "The two passwords differ."
        else:
            try:
                user = await run_in_threadpool(
                    add_user, _auth(request).sessions, name=name, role=Role.ADMIN, password=form.get("password") or ""
                )
            except AccountError as exc:
                error = str(exc)
            else:
                return await _signed_in(request, _auth(request), user.id, "/")
    ctx = {"page": Page("First run"), "closed": closed, "values": {"name": name}, "error": error}
    return templates.TemplateResponse(request, "auth/setup.html", ctx, status_code=403 if closed else 422)
