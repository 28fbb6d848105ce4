"""The PDF set of a project stored in the database (shared by the CLI and the web app).

Reads through :class:`server.services.Services` (snapshot: the model and the engine's result)
and the stored revisions (``revisions`` table: number, date, description, issued_by and the
frozen version-1 project file).  The set printed is the latest issued revision when the
project still equals it, otherwise a draft that lists the issued revisions.

Once at least one revision is issued, the set also carries a load-growth sheet per service:
the chart of the browser's Growth page (:class:`server.growth.Growth`, issued revisions and
the working copy, future band) drawn by :func:`server.charts.growth_chart_svg`.  With nothing
issued the chart would be a single point, so the sheet is left out (as it is from a set made
from a bare project file, which has no revisions).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Any

from server.calc.model import Project
from server.calc.projectfile import dump_project
from server.calc.results import ProjectResult

from .issue import history_from_revisions
from .sheets import GrowthChart, GrowthRow, IssueHistory, RevisionInfo


@dataclass(frozen=True)
class StoredSet:
    project_id: int
    model: Project
    result: ProjectResult
    history: IssueHistory
    growth: dict[str, GrowthChart] = field(default_factory=dict)  # source tag → its load-growth chart


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


def growth_charts(services: Any, project_id: int) -> dict[str, GrowthChart]:
    """Each service's load-growth chart, the same SVG the Growth page serves for that node
    (empty while no revision is issued)."""
    from server.charts import growth_chart_svg
    from server.growth import Growth

    growth = Growth(services)
    points = growth.points(project_id)
    if len(points) < 2:  # the working copy alone: nothing has grown yet
        return {}
    out: dict[str, GrowthChart] = {}
    for source in points[-1].model.sources:
        data = growth.series(project_id, source.tag, points).chart_data()
        rows = tuple(
            GrowthRow(label, c, d, f)
            for label, c, d, f in zip(
                data.labels, data.connected_kva, data.demand_kva, data.demand_future_kva, strict=True
            )
        )
        out[source.tag] = GrowthChart(source.tag, growth_chart_svg(data), rows)
    return out


def stored_set(services: Any, project_id: int) -> StoredSet:
    snap = services.snapshot(project_id)
    revisions = stored_revisions(services, project_id)
    growth = growth_charts(services, project_id) if revisions else {}
    current: RevisionInfo | None = None
    if revisions and revisions[-1][1] == json.loads(json.dumps(dump_project(snap.model))):
        current, revisions = revisions[-1][0], revisions[:-1]
    history = history_from_revisions(snap.model, snap.result, revisions, current=current, growth=bool(growth))
    return StoredSet(project_id, snap.model, snap.result, history, growth)
