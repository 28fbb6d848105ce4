"""``create_app(settings)``: the FastAPI application, built from settings (no import-time engine).

The app refuses to start on a database that is not migrated to the newest revision and names
the command that fixes it.  Errors a user can cause render a friendly page (or a fragment for
htmx); anything else is logged with its traceback and shown as a plain apology, never the
traceback itself.
"""

from __future__ import annotations

import logging

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import HTMLResponse, JSONResponse, Response
from fastapi.staticfiles import StaticFiles
from starlette.exceptions import HTTPException as StarletteHTTPException

from server import __version__
from server.config import Settings
from server.db.migrate import ensure_migrated
from server.db.session import make_engine, make_sessionmaker
from server.services import Conflict, NotFound, ServiceError, Services
from server.web.routes import (
    api,
    balance,
    comments,
    growth,
    panels,
    pdf,
    projects,
    sheets,
    transformers,
    tree,
    warnings,
)
from server.web.team import DEFAULT_RULE, install_team
from server.web.templating import STATIC_DIR, make_templates
from server.web.views import Page

log = logging.getLogger("panelwright.web")


def create_app(settings: Settings | None = None) -> FastAPI:
    """Build the app for ``settings`` (default: from the environment)."""
    settings = settings or Settings()
    engine = make_engine(settings)
    ensure_migrated(engine)  # raises DatabaseNotMigrated naming `panelwright db upgrade`

    app = FastAPI(
        title="Panelwright",
        version=__version__,
        description="Panel schedules, load roll-up, feeder and transformer sizing. Results support, and never "
        "replace, the engineer of record; the adopted code edition and local amendments govern.",
    )
    app.state.settings = settings
    app.state.engine = engine
    app.state.services = Services(make_sessionmaker(engine), cache_size=settings.calc_cache_size)
    app.state.templates = make_templates()
    app.mount("/static", StaticFiles(directory=str(STATIC_DIR)), name="static")
    install_team(app, settings)  # sign-in, roles, CSRF, audit trail, history, revisions, presence
    for module in (projects, tree, panels, comments, balance, transformers, warnings, sheets, growth, pdf, api):
        app.include_router(module.router, dependencies=DEFAULT_RULE)
    if settings.bench_endpoints:
        from server.web.routes import bench

        app.include_router(bench.router, dependencies=DEFAULT_RULE)
    _add_error_handlers(app)
    return app


def _wants_json(request: Request) -> bool:
    return request.url.path.startswith("/api/")


def _error_page(request: Request, status: int, title: str, message: str) -> Response:
    if _wants_json(request):
        return JSONResponse({"detail": message}, status_code=status)
    templates = request.app.state.templates
    if request.headers.get("HX-Request") == "true":
        return templates.TemplateResponse(
            request, "_error_fragment.html", {"title": title, "message": message}, status_code=status
        )
    return templates.TemplateResponse(
        request, "error.html", {"page": Page(title), "title": title, "message": message}, status_code=status
    )


def _add_error_handlers(app: FastAPI) -> None:
    @app.exception_handler(NotFound)
    async def not_found(request: Request, exc: NotFound) -> Response:
        return _error_page(request, 404, "Not found", str(exc))

    @app.exception_handler(Conflict)
    async def conflict(request: Request, exc: Conflict) -> Response:
        return _error_page(request, 409, "Changed meanwhile", str(exc))

    @app.exception_handler(ServiceError)
    async def service_error(request: Request, exc: ServiceError) -> Response:
        return _error_page(request, 400, "Not possible", str(exc))

    @app.exception_handler(StarletteHTTPException)
    async def http_error(request: Request, exc: StarletteHTTPException) -> Response:
        message = exc.detail if isinstance(exc.detail, str) else "The request could not be served."
        if exc.status_code == 404 and exc.detail == "Not Found":
            message = f"There is no page at {request.url.path}."
        return _error_page(request, exc.status_code, "Not found" if exc.status_code == 404 else "Error", message)

    @app.exception_handler(RequestValidationError)
    async def bad_request(request: Request, exc: RequestValidationError) -> Response:
        if _wants_json(request):
            return JSONResponse({"detail": exc.errors()}, status_code=422)
        parts = []
        for e in exc.errors():
            where = ".".join(str(x) for x in e.get("loc", ()) if x not in ("body", "query", "path"))
            parts.append(f"{where}: {e.get('msg')}" if where else str(e.get("msg")))
        return _error_page(request, 422, "Bad request", "; ".join(parts))

    @app.exception_handler(Exception)
    async def unexpected(request: Request, exc: Exception) -> Response:
        log.exception("unhandled error on %s %s", request.method, request.url.path)
        return _error_page(
            request,
            500,
            "Something went wrong",
            "The server could not finish this request; nothing was half-saved. The details are in the server log.",
        )


def html_fragment(text: str, status: int = 200) -> HTMLResponse:
    return HTMLResponse(text, status_code=status)
