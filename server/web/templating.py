"""Jinja2 environment of the app: autoescaped templates in templates/, number filters, URL builder.

Numbers arrive here already computed by :mod:`server.calc`; the filters only format them.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any
from urllib.parse import quote

from fastapi.templating import Jinja2Templates
from jinja2 import pass_context

from server import formatting
from server.auth.roles import Permission, allows
from server.calc.results import Severity
from server.commands import CAUTION

ROOT = Path(__file__).resolve().parents[2]
TEMPLATES_DIR = ROOT / "templates"
STATIC_DIR = ROOT / "static"


class Urls:
    """Every URL of the HTML app comes from here, so templates never assemble paths by hand."""

    def projects(self) -> str:
        return "/"

    def project(self, pid: int) -> str:
        return f"/projects/{pid}"

    def settings(self, pid: int) -> str:
        return f"/projects/{pid}/settings"

    def tree(self, pid: int) -> str:
        return f"/projects/{pid}/tree"

    def node(self, pid: int, tag: str, kind: str) -> str:
        if kind == "panel":
            return self.panel(pid, tag)
        if kind == "transformer":
            return self.transformer(pid, tag)
        return self.tree(pid) + f"#node-{quote(tag, safe='')}"

    def element(self, pid: int, tag: str) -> str:
        """Any element by tag; the server redirects to its panel or transformer page."""
        return f"/projects/{pid}/elements/{quote(tag, safe='')}"

    def panel(self, pid: int, tag: str) -> str:
        return f"/projects/{pid}/panels/{quote(tag, safe='')}"

    def slot(self, pid: int, tag: str, slot: int | None) -> str:
        base = self.panel(pid, tag)
        return f"{base}#slot-{slot}" if slot else base

    def circuit(self, pid: int, tag: str, slot: int) -> str:
        return f"{self.panel(pid, tag)}/circuits/{slot}"

    def transformer(self, pid: int, tag: str) -> str:
        return f"/projects/{pid}/transformers/{quote(tag, safe='')}"

    def transformers(self, pid: int) -> str:
        return f"/projects/{pid}/transformers"

    def warnings(self, pid: int) -> str:
        return f"/projects/{pid}/warnings"

    def api_project(self, pid: int) -> str:
        return f"/api/projects/{pid}"

    def api_results(self, pid: int) -> str:
        return f"/api/projects/{pid}/results"

    def static(self, path: str) -> str:
        return f"/static/{path}"


# The screens' number filters are the shared ones of server.formatting (the CLI report and the
# PDF set print with the same functions); only their names and default digits are the screens'.


def fmt_kva(va: float | None, digits: int = 1) -> str:
    """VA shown in kVA (the screens' ``kva`` filter)."""
    return formatting.va_as_kva(va, digits)


def fmt_num(x: float | None, digits: int = 0) -> str:
    return formatting.number(x, digits)


def fmt_pct(x: float | None, digits: int = 0) -> str:
    return formatting.pct(x, digits)


def fmt_value(x: Any) -> str:
    """A stored value back into a form box: integers without '.0', None as empty."""
    if x is None:
        return ""
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, float) and x.is_integer():
        return str(int(x))
    return str(getattr(x, "value", x))


@pass_context
def may(context: Any, permission: str) -> bool:
    """Whether the signed-in user may do ``permission`` ("edit", "comment", …): screens hide or
    disable what the role cannot do (the routes refuse it regardless)."""
    request = context.get("request")
    user = getattr(getattr(request, "state", None), "user", None)
    return allows(user.role if user is not None else None, Permission(permission))


@pass_context
def new_project_code(context: Any) -> str:
    """The code edition a new project starts with (the firm's setting), for the header of pages outside a project."""
    from server import firm

    request = context.get("request")
    services = getattr(getattr(getattr(request, "app", None), "state", None), "services", None)
    if services is None:
        return firm.builtin_defaults()["code"]
    try:
        return firm.load(services.sessions)["code"]
    except Exception:  # an error page must still render when the database cannot be read
        return firm.builtin_defaults()["code"]


SEVERITY_RANK = {Severity.ERROR: 3, Severity.WARNING: 2, Severity.NOTE: 1}


def make_templates() -> Jinja2Templates:
    templates = Jinja2Templates(directory=str(TEMPLATES_DIR))
    env = templates.env
    env.autoescape = True
    env.trim_blocks = True
    env.lstrip_blocks = True
    env.filters.update(kva=fmt_kva, num=fmt_num, pct=fmt_pct, val=fmt_value)
    env.globals.update(urls=Urls(), CAUTION=CAUTION, may=may, new_project_code=new_project_code)
    return templates
