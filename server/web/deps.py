"""FastAPI dependencies as ``Annotated`` aliases: the services object, htmx detection, templates."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import Depends, Request
from fastapi.templating import Jinja2Templates

from server.config import Settings
from server.services import Services


def get_services(request: Request) -> Services:
    return request.app.state.services


def get_settings(request: Request) -> Settings:
    return request.app.state.settings


def get_templates(request: Request) -> Jinja2Templates:
    return request.app.state.templates


def is_htmx(request: Request) -> bool:
    """True when htmx sent the request: the route then answers with fragments, not a page."""
    return request.headers.get("HX-Request") == "true"


async def form_dict(request: Request) -> dict[str, Any]:
    """The submitted form as a plain dict of strings (last value wins)."""
    form = await request.form()
    return {k: v for k, v in form.items() if isinstance(v, str)}


ServicesDep = Annotated[Services, Depends(get_services)]
SettingsDep = Annotated[Settings, Depends(get_settings)]
TemplatesDep = Annotated[Jinja2Templates, Depends(get_templates)]
HtmxDep = Annotated[bool, Depends(is_htmx)]
FormDep = Annotated[dict[str, Any], Depends(form_dict)]
