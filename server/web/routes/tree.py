"""The distribution of a project: indented tree and riser diagram; add, re-feed and delete elements."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import RedirectResponse, Response

from server.calc.projectfile import dump_project
from server.services import EditRejected, NotFound, Snapshot, subtree
from server.web.deps import FormDep, ServicesDep, TemplatesDep
from server.web.views import DeleteContext, TreeContext, badge, children_of, page, riser_layout, tree_nodes

router = APIRouter(tags=["tree"])


def _tree(
    request: Request,
    templates: TemplatesDep,
    snap: Snapshot,
    *,
    values: dict | None = None,
    errors: dict | None = None,
    form: str = "",
    status_code: int = 200,
) -> Response:
    nodes = tree_nodes(snap)
    feeders = [n.badge.tag for n in nodes]
    ctx = TreeContext(
        page(snap, "Distribution", "tree"), nodes, riser_layout(nodes), feeders, values or {}, errors or {}, form
    )
    return templates.TemplateResponse(
        request, "tree/index.html", {"ctx": ctx, "page": ctx.page}, status_code=status_code
    )


@router.get("/projects/{pid}/tree", name="tree")
def show_tree(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    return _tree(request, templates, svc.snapshot(pid))


@router.get("/projects/{pid}/elements/{tag}", name="element")
def element(pid: int, tag: str, svc: ServicesDep) -> Response:
    snap = svc.snapshot(pid)
    if snap.model.panel(tag):
        return RedirectResponse(f"/projects/{pid}/panels/{tag}", status_code=303)
    if snap.model.transformer(tag):
        return RedirectResponse(f"/projects/{pid}/transformers/{tag}", status_code=303)
    if snap.model.source(tag):
        return RedirectResponse(f"/projects/{pid}/tree#node-{tag}", status_code=303)
    raise NotFound(f"project {snap.info.number or pid} has no element {tag}")


@router.post("/projects/{pid}/tree/add", name="tree_add")
def add_node(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep, form: FormDep) -> Response:
    try:
        svc.add_node(pid, form)
    except EditRejected as exc:
        return _tree(
            request,
            templates,
            svc.snapshot(pid),
            values=form,
            errors=_errors(exc, tag=(form.get("tag") or "").strip()),
            form="add",
            status_code=422,
        )
    return RedirectResponse(f"/projects/{pid}/tree#node-{form.get('tag', '').strip()}", status_code=303)


@router.post("/projects/{pid}/tree/{tag}/move", name="tree_move")
def move_node(
    request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, form: FormDep
) -> Response:
    try:
        svc.move_node(pid, tag, form.get("parent") or None, breaker_amps=form.get("breaker_amps") or None)
    except EditRejected as exc:
        return _tree(
            request,
            templates,
            svc.snapshot(pid),
            values=form,
            errors=_errors(exc, tag=tag, known=frozenset({"parent", "breaker_amps"})),
            form=f"move:{tag}",
            status_code=422,
        )
    return RedirectResponse(f"/projects/{pid}/tree#node-{tag}", status_code=303)


def _delete_ctx(snap: Snapshot, tag: str, errors: dict | None = None) -> DeleteContext:
    data = dump_project(snap.model)
    down = subtree(data, tag)
    everything = [n.tag for n in (*snap.model.sources, *snap.model.transformers, *snap.model.panels)]
    candidates = [t for t in everything if t != tag and t not in down]
    return DeleteContext(
        page(snap, f"Delete {tag}", "tree"),
        badge(snap, tag),
        [badge(snap, c) for c in children_of(snap, tag)],
        down,
        candidates,
        errors or {},
    )


@router.get("/projects/{pid}/tree/{tag}/delete", name="tree_delete_confirm")
def confirm_delete(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep) -> Response:
    snap = svc.snapshot(pid)
    if not (snap.model.panel(tag) or snap.model.transformer(tag) or snap.model.source(tag)):
        raise NotFound(f"project {snap.info.number or pid} has no element {tag}")
    ctx = _delete_ctx(snap, tag)
    return templates.TemplateResponse(request, "tree/delete.html", {"ctx": ctx, "page": ctx.page})


@router.post("/projects/{pid}/tree/{tag}/delete", name="tree_delete")
def delete_node(
    request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, form: FormDep
) -> Response:
    mode = form.get("dependants") or "refuse"
    if mode not in ("refuse", "delete", "refeed"):
        mode = "refuse"
    try:
        svc.delete_node(pid, tag, dependants=mode, refeed_to=form.get("refeed_to") or None)
    except EditRejected as exc:
        errors = _errors(exc, tag=tag, known=frozenset({"dependants", "refeed_to"}))
        ctx = _delete_ctx(svc.snapshot(pid), tag, errors)
        return templates.TemplateResponse(request, "tree/delete.html", {"ctx": ctx, "page": ctx.page}, status_code=422)
    return RedirectResponse(f"/projects/{pid}/tree", status_code=303)


ADD_FIELDS = frozenset(
    {
        "tag",
        "kind",
        "system",
        "parent",
        "kva",
        "primary",
        "secondary",
        "impedance_pct",
        "fault_ka",
        "bus_amps",
        "main_amps",
        "spaces",
        "breaker_amps",
    }
)


def _errors(exc: EditRejected, *, tag: str | None = None, known: frozenset[str] = ADD_FIELDS) -> dict[str, str]:
    """Messages keyed by form field; problems of other elements go under "" with their place named."""
    out: dict[str, str] = {}
    for p in exc.problems:
        mine = p.tag is None or p.tag == tag
        key = p.field if (p.field in known and mine) else ""
        text = p.message if key else p.describe()
        out[key] = f"{out[key]}; {text}" if key in out else text
    return out
