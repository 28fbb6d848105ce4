"""The panel editor: the circuit grid, inline circuit edits (htmx), add/remove circuits, header fields.

An htmx edit answers with fragments only: the changed cell (or, when the breaker's size or
presence changed, the rows it spans), the per-phase totals, the summary and the upstream
badges, all out of band in one response.  Without htmx the same routes redirect to the page
(or render it with the messages, status 422).
"""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import RedirectResponse, Response

from server.services import (
    CIRCUIT_FORM_FIELDS,
    FEEDER_FORM_FIELDS,
    PANEL_FORM_FIELDS,
    EditRejected,
    Snapshot,
    StaleEdit,
)
from server.web.conflicts import conflict_response, expected_version, form_conflict_message
from server.web.deps import FormDep, HtmxDep, ServicesDep, TemplatesDep
from server.web.views import PanelContext, SideCell, panel_context

router = APIRouter(tags=["panels"])

PANEL = "/projects/{pid}/panels/{tag}"
CIRCUIT = PANEL + "/circuits/{slot}"


@router.get(PANEL, name="panel")
def show_panel(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep) -> Response:
    ctx = panel_context(_checked(svc.snapshot(pid), tag), tag)
    return templates.TemplateResponse(request, "panels/detail.html", {"ctx": ctx, "page": ctx.page})


@router.post(PANEL, name="panel_update")
def update_panel(
    request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, form: FormDep
) -> Response:
    try:
        svc.update_panel(pid, tag, form, expected_version=form.get("version") or None)
    except StaleEdit as exc:  # someone saved this panel since the form was drawn: 409, typed values kept
        ctx = panel_context(
            _checked(svc.snapshot(pid), tag), tag, header_values=form, header_errors={"": form_conflict_message(exc)}
        )
        return templates.TemplateResponse(
            request, "panels/detail.html", {"ctx": ctx, "page": ctx.page}, status_code=409
        )
    except EditRejected as exc:
        ctx = panel_context(_checked(svc.snapshot(pid), tag), tag, header_values=form, header_errors=_panel_errors(exc))
        return templates.TemplateResponse(
            request, "panels/detail.html", {"ctx": ctx, "page": ctx.page}, status_code=422
        )
    return RedirectResponse(request.url_for("panel", pid=pid, tag=tag).path, status_code=303)


def _panel_errors(exc: EditRejected) -> dict[str, str]:
    out: dict[str, str] = {}
    for key, message in exc.by_field().items():
        name = key.replace("feeder.", "feeder_")
        if name not in _HEADER_FIELDS:
            name = ""
        out[name] = f"{out[name]}; {message}" if name in out else message
    return out


_HEADER_FIELDS = {*PANEL_FORM_FIELDS, *(f"feeder_{k}" for k in FEEDER_FORM_FIELDS)}


@router.post(CIRCUIT, name="circuit_update")
def update_circuit(
    request: Request,
    pid: int,
    tag: str,
    slot: int,
    svc: ServicesDep,
    templates: TemplatesDep,
    htmx: HtmxDep,
    form: FormDep,
) -> Response:
    trigger = request.headers.get("HX-Trigger-Name")
    try:
        snap = svc.edit_circuit(pid, tag, slot, form, expected_version=expected_version(form))
    except EditRejected as exc:
        return _rejected(request, svc, templates, htmx, pid, tag, slot, form, exc, trigger)
    except StaleEdit as exc:  # someone saved this circuit since the page was drawn: 409, nothing lost
        return conflict_response(request, svc, templates, htmx, pid, tag, slot, exc, trigger)
    if not htmx:
        return _back_to_slot(request, pid, tag, slot)
    structural = trigger is None or trigger == "poles"
    return _edit_response(request, templates, snap, tag, slot, trigger, structural, f"Circuit {slot} saved.")


@router.post(CIRCUIT + "/add", name="circuit_add")
def add_circuit(
    request: Request,
    pid: int,
    tag: str,
    slot: int,
    svc: ServicesDep,
    templates: TemplatesDep,
    htmx: HtmxDep,
    form: FormDep,
) -> Response:
    try:
        snap = svc.edit_circuit(pid, tag, slot, form, create=True)
    except EditRejected as exc:
        return _rejected(request, svc, templates, htmx, pid, tag, slot, form, exc, None)
    if not htmx:
        return _back_to_slot(request, pid, tag, slot)
    return _edit_response(request, templates, snap, tag, slot, None, True, f"Circuit {slot} added.")


@router.post(CIRCUIT + "/delete", name="circuit_delete")
def delete_circuit(
    request: Request, pid: int, tag: str, slot: int, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep
) -> Response:
    try:
        snap = svc.delete_circuit(pid, tag, slot)
    except EditRejected as exc:
        return _rejected(request, svc, templates, htmx, pid, tag, slot, {}, exc, None)
    if not htmx:
        return _back_to_slot(request, pid, tag, slot)
    return _edit_response(request, templates, snap, tag, slot, None, True, f"Circuit {slot} removed.")


# --------------------------------------------------------------------------- helpers


def _checked(snap: Snapshot, tag: str) -> Snapshot:
    if snap.model.panel(tag) is None:
        from server.services import NotFound

        raise NotFound(f"project {snap.info.number or snap.project_id} has no panel {tag}")
    return snap


def _back_to_slot(request: Request, pid: int, tag: str, slot: int) -> Response:
    return RedirectResponse(request.url_for("panel", pid=pid, tag=tag).path + f"#slot-{slot}", status_code=303)


def _rows_around(ctx: PanelContext, slot: int) -> list:
    """The pair rows a breaker at ``slot`` can span (up to 3 poles), clipped to the panel."""
    first = (slot + 1) // 2
    return [r for r in ctx.rows if first <= r.number <= first + 2]


def _cell(ctx: PanelContext, slot: int) -> SideCell | None:
    for r in ctx.rows:
        for c in (r.left, r.right):
            if c.slot == slot:
                return c
    return None


def _edit_response(
    request: Request,
    templates: TemplatesDep,
    snap: Snapshot,
    tag: str,
    slot: int,
    trigger: str | None,
    structural: bool,
    message: str,
    *,
    ctx: PanelContext | None = None,
    error_fields: list[str] | None = None,
    status_code: int = 200,
) -> Response:
    ctx = ctx or panel_context(snap, tag, near_slot=slot)
    rows: list = []
    cells: list = []
    cell = _cell(ctx, slot)
    if structural or cell is None or cell.kind != "circuit":
        rows = _rows_around(ctx, slot)
    else:
        # Only the cells that must change: the one just edited (its neighbours may be mid-typing).
        names = [n for n in (trigger, *(error_fields or ())) if n in CIRCUIT_FORM_FIELDS and n != "notes"]
        cells = [(cell, n) for n in dict.fromkeys(names)] + [(cell, "ckt")]
    return templates.TemplateResponse(
        request,
        "panels/_edit_response.html",
        {
            "ctx": ctx,
            "page": ctx.page,
            "rows": rows,
            "cells": cells,
            "message": message,
            "status_error": status_code >= 400,
        },
        status_code=status_code,
    )


def _rejected(
    request: Request,
    svc: ServicesDep,
    templates: TemplatesDep,
    htmx: bool,
    pid: int,
    tag: str,
    slot: int,
    form: dict,
    exc: EditRejected,
    trigger: str | None,
) -> Response:
    snap = _checked(svc.snapshot(pid), tag)
    errors = exc.by_field()
    typed = {k: v for k, v in form.items() if k in CIRCUIT_FORM_FIELDS}
    ctx = panel_context(snap, tag, override_slot=slot, override_values=typed, errors=errors)
    if not htmx:
        return templates.TemplateResponse(
            request, "panels/detail.html", {"ctx": ctx, "page": ctx.page}, status_code=422
        )
    where = f"Circuit {slot} not saved: " + "; ".join((f"{k}: {m}" if k else m) for k, m in errors.items())
    return _edit_response(
        request,
        templates,
        snap,
        tag,
        slot,
        trigger,
        trigger is None,
        where,
        ctx=ctx,
        error_fields=list(errors),
        status_code=422,
    )
