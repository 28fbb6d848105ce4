"""Projects: list, create, copy, archive, settings, and the project file download."""

from __future__ import annotations

import json

from fastapi import APIRouter, Request
from fastapi.responses import RedirectResponse, Response

from server import firm
from server.services import EditRejected, StaleEdit
from server.versions import content_version
from server.web.conflicts import form_conflict_message
from server.web.deps import FormDep, ServicesDep, TemplatesDep
from server.web.views import Page, ProjectListContext, SettingsContext, page, settings_values

router = APIRouter(tags=["projects"])


def _list(
    request: Request,
    svc: ServicesDep,
    templates: TemplatesDep,
    *,
    show_archived: bool = False,
    values: dict | None = None,
    errors: dict | None = None,
    status_code: int = 200,
) -> Response:
    ctx = ProjectListContext(
        Page("Projects"),
        svc.list_projects(include_archived=show_archived),
        show_archived,
        values or _new_project_values(svc),
        errors or {},
    )
    return templates.TemplateResponse(
        request, "projects/list.html", {"ctx": ctx, "page": ctx.page}, status_code=status_code
    )


def _new_project_values(svc: ServicesDep) -> dict[str, str]:
    """The new-project form starts from the firm's code edition and occupancy (admin: Firm settings)."""
    defaults = firm.load(svc.sessions)
    return {"code": defaults["code"], "occupancy": defaults["occupancy"]}


@router.get("/", name="projects")
def list_projects(request: Request, svc: ServicesDep, templates: TemplatesDep, archived: bool = False) -> Response:
    return _list(request, svc, templates, show_archived=archived)


@router.post("/projects", name="project_create")
def create_project(request: Request, svc: ServicesDep, templates: TemplatesDep, form: FormDep) -> Response:
    try:
        pid = svc.create_blank_project(form)
    except EditRejected as exc:
        errors = {k.removeprefix("project."): v for k, v in exc.by_field().items()}
        return _list(request, svc, templates, values=form, errors=errors, status_code=422)
    return RedirectResponse(f"/projects/{pid}/tree", status_code=303)


@router.get("/projects/{pid}", name="project")
def show_project(pid: int, svc: ServicesDep) -> Response:
    svc.snapshot(pid)  # 404 if missing
    return RedirectResponse(f"/projects/{pid}/tree", status_code=303)


@router.post("/projects/{pid}/copy", name="project_copy")
def copy_project(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep, form: FormDep) -> Response:
    info = svc.snapshot(pid).info
    name = (form.get("name") or "").strip() or f"{info.name} (copy)"
    number = (form.get("number") or "").strip() or (f"{info.number}-copy" if info.number else "")
    try:
        new_id = svc.copy_project(pid, name=name, number=number)
    except EditRejected as exc:
        errors = {k.removeprefix("project."): v for k, v in exc.by_field().items()}
        return _list(request, svc, templates, values=form, errors=errors, status_code=422)
    return RedirectResponse(f"/projects/{new_id}/tree", status_code=303)


@router.post("/projects/{pid}/archive", name="project_archive")
def archive_project(pid: int, svc: ServicesDep, form: FormDep) -> Response:
    archived = (form.get("archived") or "true").lower() in ("true", "1", "yes")
    svc.set_archived(pid, archived)
    return RedirectResponse("/?archived=true" if not archived else "/", status_code=303)


@router.get("/projects/{pid}/settings", name="project_settings")
def show_settings(
    request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep, saved: bool = False
) -> Response:
    snap = svc.snapshot(pid)
    ctx = SettingsContext(page(snap, "Project settings", "settings"), settings_values(snap), {}, saved)
    return templates.TemplateResponse(
        request, "projects/settings.html", {"ctx": ctx, "page": ctx.page, "form_version": content_version(snap.info)}
    )


@router.post("/projects/{pid}/settings", name="project_settings_update")
def update_settings(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep, form: FormDep) -> Response:
    try:
        svc.update_settings(pid, form, expected_version=form.get("version") or None)
    except StaleEdit as exc:  # someone saved the settings since the form was drawn: 409, typed values kept
        snap = svc.snapshot(pid)
        values = {**settings_values(snap), **form}
        ctx = SettingsContext(page(snap, "Project settings", "settings"), values, {"": form_conflict_message(exc)})
        return templates.TemplateResponse(
            request,
            "projects/settings.html",
            {"ctx": ctx, "page": ctx.page, "form_version": content_version(snap.info)},
            status_code=409,
        )
    except EditRejected as exc:
        snap = svc.snapshot(pid)
        values = {**settings_values(snap), **form}
        if "include_future" not in form:
            values["include_future"] = "no"
        ctx = SettingsContext(page(snap, "Project settings", "settings"), values, exc.by_field())
        return templates.TemplateResponse(
            request,
            "projects/settings.html",
            {"ctx": ctx, "page": ctx.page, "form_version": content_version(snap.info)},
            status_code=422,
        )
    return RedirectResponse(f"/projects/{pid}/settings?saved=true", status_code=303)


@router.get("/projects/{pid}/export", name="project_export")
def export_project(pid: int, svc: ServicesDep) -> Response:
    data = svc.export_file(pid)
    name = (data["project"]["number"] or f"project-{pid}").replace("/", "-")
    return Response(
        json.dumps(data, indent=2, ensure_ascii=False) + "\n",
        media_type="application/json",
        headers={"Content-Disposition": f'attachment; filename="{name}.panelwright.json"'},
    )
