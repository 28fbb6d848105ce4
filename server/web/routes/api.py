"""JSON API beside the HTML: projects as version-1 files, and their results.

PUT replaces a whole project with a version-1 file; a file that breaks a rule is refused with
422 and the list of problems (each naming tag, slot and field), and nothing is written.
"""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Body
from fastapi.responses import JSONResponse

from server.services import EditRejected
from server.web.deps import ServicesDep

router = APIRouter(prefix="/api", tags=["api"])

ProjectFileBody = Annotated[dict[str, Any], Body(description="a version-1 project file")]


def _problems(exc: EditRejected) -> JSONResponse:
    return JSONResponse(
        {
            "detail": "the project file breaks the rules below; nothing was written",
            "problems": [
                {"tag": p.tag, "slot": p.slot, "field": p.field, "message": p.message, "text": p.describe()}
                for p in exc.problems
            ],
        },
        status_code=422,
    )


@router.get("/projects", summary="List projects")
def list_projects(svc: ServicesDep, archived: bool = False) -> list[dict[str, Any]]:
    return [
        {"id": p.id, "number": p.number, "name": p.name, "client": p.client, "code": p.code, "archived": p.archived}
        for p in svc.list_projects(include_archived=archived)
    ]


@router.get("/projects/{pid}", summary="The version-1 project file")
def get_project(pid: int, svc: ServicesDep) -> dict[str, Any]:
    return svc.export_file(pid)


@router.put("/projects/{pid}", summary="Replace the project with a version-1 file", response_model=None)
def put_project(pid: int, svc: ServicesDep, body: ProjectFileBody) -> dict[str, Any] | JSONResponse:
    svc.snapshot(pid)  # 404 before validation when the project does not exist
    try:
        snap = svc.replace_project(pid, body)
    except EditRejected as exc:
        return _problems(exc)
    return {"id": pid, "data_version": snap.data_version}


@router.post("/projects", summary="Create a project from a version-1 file", status_code=201, response_model=None)
def post_project(svc: ServicesDep, body: ProjectFileBody) -> dict[str, Any] | JSONResponse:
    try:
        pid = svc.create_project(body)
    except EditRejected as exc:
        return _problems(exc)
    return {"id": pid}


@router.get("/projects/{pid}/results", summary="Calculation results (ProjectResult.to_json())")
def get_results(pid: int, svc: ServicesDep) -> dict[str, Any]:
    return svc.results_json(pid)
