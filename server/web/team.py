"""Wiring of team use into the app: accounts, the auth middleware, the audit trail, presence.

``create_app`` calls :func:`install_team` once; the editing screens' routers are included
with :data:`DEFAULT_RULE` (read on GET, edit otherwise), and the routers added here declare
their own permission on every route.
"""

from __future__ import annotations

from fastapi import Depends, FastAPI

from server import audit
from server.auth.accounts import server_secret
from server.auth.middleware import AuthConfig, AuthMiddleware
from server.auth.permissions import BY_METHOD
from server.auth.ratelimit import LoginLimiter
from server.config import Settings
from server.presence import Presence
from server.versions import content_version

#: The rule attached to routers that do not declare one per route (see server.auth.permissions).
DEFAULT_RULE = [Depends(BY_METHOD)]


def install_team(app: FastAPI, settings: Settings) -> None:
    from server.web.routes import auth, firm, history, presence, revisions, users

    services = app.state.services
    audit.install(services.sessions)
    config = AuthConfig(
        sessions=services.sessions,
        secret=server_secret(services.sessions, settings.secret_key),
        session_hours=settings.session_hours,
        single_user=settings.single_user,
        cookie_secure=settings.cookie_secure,
        limiter=LoginLimiter(settings.login_max_failures, settings.login_window_s),
    )
    app.state.auth = config
    app.state.presence = Presence()
    app.state.templates.env.globals["content_version"] = content_version  # hidden "version" of whole-element forms
    app.add_middleware(AuthMiddleware, config=config)
    for module in (auth, users, firm, history, revisions, presence):
        app.include_router(module.router)
