"""The dependency every route declares: ``Depends(Require(Permission.X))``.

``Require(None)`` (:data:`BY_METHOD`) asks for ``read`` on GET/HEAD and ``edit`` on anything
else; the app attaches it to the routers of the editing screens as a whole.  A route of such a
router may declare its own ``Require(permission)``, which then replaces the default (e.g.
``Depends(Require(Permission.READ))`` on a POST that reviewers may send).  Every check also
verifies the CSRF token on unsafe methods: the ``X-CSRF-Token`` header (htmx sends it from
``hx-headers`` on ``<body>``) or the ``csrf_token`` field of a form.  The token is an HMAC of
the browser's session token, so it changes at sign-in and cannot be guessed by another site.

tests/integration/test_security.py walks ``app.routes`` and fails for a route without one.
"""

from __future__ import annotations

import hmac
from typing import Any

from fastapi import HTTPException, Request
from fastapi.routing import APIRoute

from .accounts import UserInfo
from .roles import Permission, allows

SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
CSRF_HEADER = "X-CSRF-Token"
CSRF_FIELD = "csrf_token"
_RANK = {
    Permission.PUBLIC: 0,
    Permission.READ: 1,
    Permission.COMMENT: 2,
    Permission.EDIT: 3,
    Permission.ISSUE: 3,
    Permission.ADMIN: 4,
}


class Require:
    """A route's permission; ``None`` means "read for safe methods, edit for the rest"."""

    def __init__(self, permission: Permission | None = None) -> None:
        self.permission = permission

    def needed(self, method: str) -> Permission:
        if self.permission is not None:
            return self.permission
        return Permission.READ if method.upper() in SAFE_METHODS else Permission.EDIT

    def __repr__(self) -> str:
        return f"Require({self.permission or 'by method'})"

    async def __call__(self, request: Request) -> UserInfo | None:
        user: UserInfo | None = getattr(request.state, "user", None)
        if self.permission is None and _declares_own(request.scope.get("route")):
            return user  # the route's own Require decides (e.g. a POST that reviewers may send)
        needed = self.needed(request.method)
        if not allows(user.role if user else None, needed):
            if user is None:
                raise HTTPException(401, "sign in first")
            raise HTTPException(403, f"your role ({user.role}) may not {_VERB[needed]}; ask an admin")
        if request.method not in SAFE_METHODS:
            await check_csrf(request)
        return user


_VERB = {
    Permission.READ: "view this",
    Permission.COMMENT: "comment",
    Permission.EDIT: "change projects",
    Permission.ISSUE: "issue revisions",
    Permission.ADMIN: "manage users or firm settings",
    Permission.PUBLIC: "do this",
}

BY_METHOD = Require(None)


async def check_csrf(request: Request) -> None:
    expected = getattr(request.state, "csrf_token", None)
    got = request.headers.get(CSRF_HEADER)
    if not got:
        ctype = request.headers.get("content-type", "")
        if ctype.startswith(("application/x-www-form-urlencoded", "multipart/form-data")):
            form = await request.form()  # Starlette keeps the parsed form for the route
            value = form.get(CSRF_FIELD)
            got = value if isinstance(value, str) else None
    if not expected or not got or not hmac.compare_digest(str(expected), got):
        raise HTTPException(
            403, "the page's security token is missing or out of date (CSRF check); reload the page and try again"
        )


def iter_routes(routes: Any) -> Any:
    """Every route of an app, flattened through included routers.

    Yields API routes (anything with ``path``, ``methods`` and ``dependant``, including the
    effective routes FastAPI builds for included routers) and the plain routes and mounts
    (``/docs``, ``/openapi.json``, ``/static``) as they are.
    """
    for route in routes:
        nested = getattr(route, "effective_candidates", None)
        if callable(nested):
            yield from iter_routes(nested())
        else:
            yield route


def route_requirements(route: APIRoute) -> list[Require]:
    """Every :class:`Require` a route depends on (directly or through sub-dependencies)."""
    found: list[Require] = []

    def walk(dependant: Any) -> None:
        for dep in dependant.dependencies:
            if isinstance(dep.call, Require):
                found.append(dep.call)
            walk(dep)

    walk(route.dependant)
    return found


def _declares_own(route: Any) -> bool:
    return (
        route is not None
        and hasattr(route, "dependant")
        and any(r.permission is not None for r in route_requirements(route))
    )


def route_permission(route: APIRoute, method: str) -> Permission | None:
    """What a route asks for with ``method`` (None: it declares nothing).

    A route's own ``Require(permission)`` wins over the router's by-method default, so a POST
    may be opened to reviewers; several explicit ones all apply (the strictest decides).
    """
    reqs = route_requirements(route)
    explicit = [r.needed(method) for r in reqs if r.permission is not None]
    needs = explicit or [r.needed(method) for r in reqs]
    return max(needs, key=lambda p: _RANK[p]) if needs else None
