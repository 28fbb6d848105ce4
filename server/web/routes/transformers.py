"""Transformers: the project's transformer schedule and one transformer's editor."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import RedirectResponse, Response

from server.services import EditRejected, NotFound, Snapshot, StaleEdit
from server.web.conflicts import form_conflict_message
from server.web.deps import FormDep, ServicesDep, TemplatesDep
from server.web.views import (
    TransformerContext,
    TransformerScheduleContext,
    ancestors_of,
    badge,
    children_of,
    page,
    transformer_row,
    transformer_values,
)

router = APIRouter(tags=["transformers"])


@router.get("/projects/{pid}/transformers", name="transformers")
def schedule(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    snap = svc.snapshot(pid)
    ctx = TransformerScheduleContext(
        page(snap, "Transformer schedule", "transformers"), [transformer_row(snap, t) for t in snap.model.transformers]
    )
    return templates.TemplateResponse(request, "transformers/schedule.html", {"ctx": ctx, "page": ctx.page})


def _detail(
    request: Request,
    templates: TemplatesDep,
    snap: Snapshot,
    tag: str,
    *,
    values: dict | None = None,
    errors: dict | None = None,
    status_code: int = 200,
) -> Response:
    t = snap.model.transformer(tag)
    if t is None:
        raise NotFound(f"project {snap.info.number or snap.project_id} has no transformer {tag}")
    vals = transformer_values(t)
    vals.update(values or {})
    ctx = TransformerContext(
        page(snap, f"Transformer {tag}", "transformers"),
        transformer_row(snap, t),
        [badge(snap, a) for a in reversed(ancestors_of(snap, tag))],
        [badge(snap, c) for c in children_of(snap, tag)],
        vals,
        errors or {},
    )
    return templates.TemplateResponse(
        request, "transformers/detail.html", {"ctx": ctx, "page": ctx.page}, status_code=status_code
    )


@router.get("/projects/{pid}/transformers/{tag}", name="transformer")
def show(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep) -> Response:
    return _detail(request, templates, svc.snapshot(pid), tag)


@router.post("/projects/{pid}/transformers/{tag}", name="transformer_update")
def update(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, form: FormDep) -> Response:
    try:
        svc.update_transformer(pid, tag, form, expected_version=form.get("version") or None)
    except StaleEdit as exc:  # someone saved this transformer since the form was drawn: 409, typed values kept
        return _detail(
            request,
            templates,
            svc.snapshot(pid),
            tag,
            values=form,
            errors={"": form_conflict_message(exc)},
            status_code=409,
        )
    except EditRejected as exc:
        errors: dict[str, str] = {}
        for key, message in exc.by_field().items():
            name = key.replace("feeder.", "feeder_")
            name = name if name in form else ""
            errors[name] = f"{errors[name]}; {message}" if name in errors else message
        return _detail(request, templates, svc.snapshot(pid), tag, values=form, errors=errors, status_code=422)
    return RedirectResponse(f"/projects/{pid}/transformers/{tag}", status_code=303)
