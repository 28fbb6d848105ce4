"""The PDF set of a project stored in the database (shared by the CLI and the web app).

Reads through :class:`server.services.Services` (snapshot: the model and the engine's result)
and the stored revisions (``revisions`` table: number, date, description, issued_by and the
frozen version-1 project file).  The set printed is the latest issued revision when the
project still equals it, otherwise a draft that lists the issued revisions.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Any

from server.calc.model import Project
from server.calc.projectfile import dump_project
from server.calc.results import ProjectResult

from .issue import history_from_revisions
from .sheets import IssueHistory, RevisionInfo


@dataclass(frozen=True)
class StoredSet:
    project_id: int
    model: Project
    result: ProjectResult
    history: IssueHistory


def _date(value: Any) -> str:
    return value.date().isoformat() if hasattr(value, "date") else str(value or "")


def stored_revisions(services: Any, project_id: int) -> list[tuple[RevisionInfo, dict[str, Any]]]:
    """Every issued revision of a project, oldest first, with its project file."""
    from server.repo import projects as repo

    with services.sessions() as s:
        rows = repo.list_revisions(s, project_id=project_id)
        return [
            (
                RevisionInfo(r.number, _date(r.issued_at), r.description or "", r.issued_by or ""),
                json.loads(r.project_json),
            )
            for r in rows
        ]


def stored_set(services: Any, project_id: int) -> StoredSet:
    snap = services.snapshot(project_id)
    revisions = stored_revisions(services, project_id)
    current: RevisionInfo | None = None
    if revisions and revisions[-1][1] == json.loads(json.dumps(dump_project(snap.model))):
        current, revisions = revisions[-1][0], revisions[:-1]
    history = history_from_revisions(snap.model, snap.result, revisions, current=current)
    return StoredSet(project_id, snap.model, snap.result, history)
