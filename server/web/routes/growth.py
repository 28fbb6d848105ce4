"""Load growth and existing conditions: dashboard, growth charts, headroom, what-if and metered import.

Thin: parse → :class:`server.growth.Growth` → typed context → template.  The what-if preview is
a GET (it writes nothing, so a reviewer may run it too); "apply" is a POST that goes through the
panel editor's own service call.  The metered import is upload (analysis only, nothing stored)
→ confirm (stored, the project recomputed).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from urllib.parse import quote

from fastapi import APIRouter, Request
from fastapi.responses import RedirectResponse, Response
from markupsafe import Markup
from starlette.datastructures import UploadFile

from server.calc.headroom import Headroom
from server.calc.model import Category
from server.calc.whatif import WhatIfPreview
from server.charts import growth_chart_svg, profile_chart_svg
from server.growth import DashboardRow, Growth, MeteredPreview, MeteredRefused, MeteredRow, NodeSeries
from server.services import EditRejected, NotFound, Snapshot
from server.web.deps import HtmxDep, ServicesDep, TemplatesDep
from server.web.views import Page, badge, page

router = APIRouter(tags=["growth"])

BASE = "/projects/{pid}/growth"
NODE = BASE + "/nodes/{tag}"


def growth_url(pid: int, tag: str | None = None, what: str = "") -> str:
    """Every URL of these pages (one builder, like server.web.templating.Urls)."""
    url = f"/projects/{pid}/growth"
    if tag is not None:
        url += f"/nodes/{quote(tag, safe='')}"
    return url + (f"/{what}" if what else "")


def _growth(svc: ServicesDep) -> Growth:
    return Growth(svc)


# --------------------------------------------------------------------------- contexts


@dataclass(frozen=True)
class DashboardContext:
    """The project manager's view: nodes closest to a limit first, growth since the first revision."""

    page: Page
    rows: list[DashboardRow]
    labels: tuple[str, ...]  # the snapshots: issued revisions, then the working copy
    first_label: str | None  # the first issued revision (None: nothing issued yet)
    metered: list[MeteredRow]
    urls: dict[str, str]
    sources: list[str]


@dataclass(frozen=True)
class NodeContext:
    """One node: its growth chart and table, its headroom checks, the what-if form (panels)."""

    page: Page
    tag: str
    kind: str
    series: NodeSeries
    chart: Markup
    headroom: Headroom
    node_url: str
    chart_url: str
    whatif_url: str
    metered_url: str
    panel_url: str | None
    metered: list[MeteredRow]
    values: dict[str, str] = field(default_factory=dict)
    errors: dict[str, str] = field(default_factory=dict)
    preview: WhatIfPreview | None = None
    categories: tuple[str, ...] = tuple(c.value for c in Category if c != Category.SPARE)


@dataclass(frozen=True)
class MeteredContext:
    """Metered existing loads of the project: the upload form and every stored figure."""

    page: Page
    nodes: list[str]
    rows: list[MeteredRow]
    values: dict[str, str]
    errors: dict[str, str]
    refusal: str = ""
    bad_rows: tuple[tuple[int, str], ...] = ()
    preview: MeteredPreview | None = None
    chart: Markup | None = None
    base_url: str = ""


# --------------------------------------------------------------------------- dashboard


@router.get(BASE, name="growth_dashboard")
def dashboard(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    g = _growth(svc)
    snap, rows, points = g.dashboard(pid)
    ctx = DashboardContext(
        page(snap, "Load growth and headroom", "growth"),
        rows,
        tuple(p.label for p in points),
        points[0].label if len(points) > 1 else None,
        g.metered_rows(pid),
        {"metered": growth_url(pid, what="metered")},
        [s.tag for s in snap.model.sources],
    )
    return templates.TemplateResponse(request, "growth/dashboard.html", {"ctx": ctx, "page": ctx.page})


# --------------------------------------------------------------------------- one node


def _node_context(
    g: Growth,
    snap: Snapshot,
    tag: str,
    *,
    values: dict[str, str] | None = None,
    errors: dict[str, str] | None = None,
    preview: WhatIfPreview | None = None,
) -> NodeContext:
    pid = snap.project_id
    kind = badge(snap, tag).kind
    if kind == "source" and snap.model.source(tag) is None:
        raise NotFound(f"project {snap.info.number or pid} has no element {tag}")
    heads = g.headroom(pid)[1]
    series = g.series(pid, tag)
    return NodeContext(
        page=page(snap, f"Growth and headroom of {tag}", "growth"),
        tag=tag,
        kind=kind,
        series=series,
        chart=Markup(growth_chart_svg(series.chart_data())),
        headroom=heads[tag],
        node_url=growth_url(pid, tag),
        chart_url=growth_url(pid, tag, "chart.svg"),
        whatif_url=growth_url(pid, tag, "whatif"),
        metered_url=growth_url(pid, what="metered") + f"?node={quote(tag, safe='')}",
        panel_url=f"/projects/{pid}/panels/{quote(tag, safe='')}" if kind == "panel" else None,
        metered=[m for m in g.metered_rows(pid) if m.node_tag == tag],
        values=values or {"kva": "", "category": "equipment", "poles": "1", "pf": "", "continuous": ""},
        errors=errors or {},
        preview=preview,
    )


@router.get(NODE, name="growth_node")
def node(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep) -> Response:
    g = _growth(svc)
    ctx = _node_context(g, svc.snapshot(pid), tag)
    return templates.TemplateResponse(request, "growth/node.html", {"ctx": ctx, "page": ctx.page})


@router.get(NODE + "/chart.svg", name="growth_chart")
def chart(pid: int, tag: str, svc: ServicesDep) -> Response:
    series = _growth(svc).series(pid, tag)
    return Response(growth_chart_svg(series.chart_data()), media_type="image/svg+xml")


def _errors(exc: EditRejected) -> dict[str, str]:
    return exc.by_field()


@router.get(NODE + "/whatif", name="growth_whatif")
def whatif(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep) -> Response:
    """Preview an added load; nothing is saved."""
    g = _growth(svc)
    values = {k: v for k, v in request.query_params.items()}
    try:
        snap, pv = g.whatif(pid, tag, values)
        ctx = _node_context(g, snap, tag, values=values, preview=pv)
        status = 200
    except EditRejected as exc:
        ctx = _node_context(g, svc.snapshot(pid), tag, values=values, errors=_errors(exc))
        status = 422
    name = "growth/_whatif.html" if htmx else "growth/node.html"
    return templates.TemplateResponse(request, name, {"ctx": ctx, "page": ctx.page}, status_code=status)


@router.post(NODE + "/whatif", name="growth_whatif_apply")
async def whatif_apply(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep) -> Response:
    """Save the previewed load as a new circuit (the panel editor's edit: same validation, same audit)."""
    g = _growth(svc)
    form = {k: v for k, v in (await request.form()).items() if isinstance(v, str)}
    try:
        _snap, slot = g.apply_whatif(pid, tag, form)
    except EditRejected as exc:
        ctx = _node_context(g, svc.snapshot(pid), tag, values=form, errors=_errors(exc))
        return templates.TemplateResponse(request, "growth/node.html", {"ctx": ctx, "page": ctx.page}, status_code=422)
    return RedirectResponse(f"/projects/{pid}/panels/{quote(tag, safe='')}#slot-{slot}", status_code=303)


# --------------------------------------------------------------------------- metered existing load


def _metered_page(
    request: Request,
    templates: TemplatesDep,
    g: Growth,
    pid: int,
    *,
    values: dict[str, str],
    errors: dict[str, str] | None = None,
    refusal: str = "",
    bad_rows: tuple[tuple[int, str], ...] = (),
    preview: MeteredPreview | None = None,
    status_code: int = 200,
) -> Response:
    snap = g.services.snapshot(pid)
    ctx = MeteredContext(
        page(snap, "Metered existing load (NEC 220.87)", "growth"),
        g.node_tags(pid),
        g.metered_rows(pid),
        values,
        errors or {},
        refusal,
        bad_rows,
        preview,
        Markup(profile_chart_svg(preview.chart_data())) if preview is not None and preview.result.daily_peaks else None,
        growth_url(pid, what="metered"),
    )
    return templates.TemplateResponse(
        request, "growth/metered.html", {"ctx": ctx, "page": ctx.page}, status_code=status_code
    )


@router.get(BASE + "/metered", name="growth_metered")
def metered(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    values = {"node": request.query_params.get("node", ""), "pf": "0.9", "tz": "", "strict": ""}
    return _metered_page(request, templates, _growth(svc), pid, values=values)


@router.post(BASE + "/metered/preview", name="growth_metered_preview")
async def metered_preview(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    """Analyse an uploaded CSV and show it; nothing is stored until the engineer confirms."""
    g = _growth(svc)
    form = await request.form()
    values = {k: v for k, v in form.items() if isinstance(v, str)}
    upload = form.get("file")
    if not isinstance(upload, UploadFile) or not upload.filename:
        return _metered_page(
            request, templates, g, pid, values=values, errors={"file": "choose a CSV file"}, status_code=422
        )
    data = await upload.read()
    try:
        pv = g.metered_preview(pid, upload.filename, data, values)
    except EditRejected as exc:
        return _metered_page(request, templates, g, pid, values=values, errors=exc.by_field(), status_code=422)
    except MeteredRefused as exc:
        return _metered_page(
            request, templates, g, pid, values=values, refusal=str(exc), bad_rows=exc.bad_rows, status_code=422
        )
    return _metered_page(request, templates, g, pid, values=values, preview=pv)


@router.post(BASE + "/metered/confirm", name="growth_metered_confirm")
async def metered_confirm(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    g = _growth(svc)
    values = {k: v for k, v in (await request.form()).items() if isinstance(v, str)}
    user = getattr(getattr(request.state, "user", None), "name", "") or ""
    try:
        g.metered_confirm(pid, values.get("token", ""), values, user=user)
    except EditRejected as exc:
        return _metered_page(request, templates, g, pid, values=values, errors=exc.by_field(), status_code=422)
    except MeteredRefused as exc:
        return _metered_page(
            request, templates, g, pid, values=values, refusal=str(exc), bad_rows=exc.bad_rows, status_code=422
        )
    return RedirectResponse(growth_url(pid, values.get("node", "")), status_code=303)


@router.post(BASE + "/metered/{mid}/active", name="growth_metered_active")
async def metered_active(request: Request, pid: int, mid: int, svc: ServicesDep) -> Response:
    form = await request.form()
    active = str(form.get("active") or "") in {"true", "yes", "on", "1"}
    _growth(svc).set_metered_active(pid, mid, active)
    return RedirectResponse(growth_url(pid, what="metered"), status_code=303)
