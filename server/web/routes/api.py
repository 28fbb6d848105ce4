"""JSON API beside the HTML: projects as version-1 files, and their results.

PUT replaces a whole project with a version-1 file; a file that breaks a rule is refused with
422 and the list of problems (each naming tag, slot and field), and nothing is written.

Optimistic locking (RFC 9110 §13.1.1 If-Match, §8.8.3 ETag; 428 from RFC 6585 §3): GET of a
project answers with an ``ETag`` naming the project's ``data_version``; PUT must send it back in
``If-Match``.  Missing → 428, another version (someone saved meanwhile) → 409; both with a JSON
``detail`` and nothing written.  The check runs inside the write's transaction.
"""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Body, Header, Response
from fastapi.responses import JSONResponse

from server.calc import projectfile as pf
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


def etag(pid: int, data_version: int) -> str:
    """The strong entity tag of a project's file at ``data_version``."""
    return f'"p{pid}-v{data_version}"'


def _if_match_version(pid: int, if_match: str | None) -> int | JSONResponse:
    """The data_version named by ``If-Match``, or the 428/409 answer refusing the request."""
    if not if_match or not if_match.strip() or if_match.strip() == "*":
        return JSONResponse(
            {
                "detail": "If-Match header missing: send the ETag that GET /api/projects/"
                f"{pid} returned, so a newer version saved by someone else is not overwritten; nothing was written"
            },
            status_code=428,
        )
    for tag in (t.strip() for t in if_match.split(",")):
        prefix = f'"p{pid}-v'
        if tag.startswith(prefix) and tag.endswith('"') and tag[len(prefix) : -1].isdigit():
            return int(tag[len(prefix) : -1])
    return JSONResponse(
        {
            "detail": f"If-Match {if_match.strip()!r} is not an ETag of project {pid} "
            f'(expected the form "p{pid}-v<number>" from GET /api/projects/{pid}); nothing was written'
        },
        status_code=409,
    )


@router.get("/projects/{pid}", summary="The version-1 project file (ETag: its data_version)")
def get_project(pid: int, svc: ServicesDep, response: Response) -> dict[str, Any]:
    snap = svc.snapshot(pid)  # file and tag from the same read
    response.headers["ETag"] = etag(pid, snap.data_version)
    return pf.dump_project(snap.model)


@router.put(
    "/projects/{pid}",
    summary="Replace the project with a version-1 file (If-Match: the ETag of GET required)",
    response_model=None,
)
def put_project(
    pid: int,
    svc: ServicesDep,
    body: ProjectFileBody,
    response: Response,
    if_match: Annotated[str | None, Header(description="the ETag of GET /api/projects/{pid}")] = None,
) -> dict[str, Any] | JSONResponse:
    svc.snapshot(pid)  # 404 before anything else when the project does not exist
    expected = _if_match_version(pid, if_match)
    if isinstance(expected, JSONResponse):
        return expected
    try:
        snap = svc.replace_project(pid, body, expected_data_version=expected)  # StaleProject → 409
    except EditRejected as exc:
        return _problems(exc)
    response.headers["ETag"] = etag(pid, snap.data_version)
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
