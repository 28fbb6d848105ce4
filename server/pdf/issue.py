"""Building a submittal set end to end: results → revision history → sheets → one PDF.

Entry points used by the CLI (``panelwright pdf``) and the web app's background job:

* :func:`history_for` — the :class:`~server.pdf.sheets.IssueHistory` of a set from the
  previous issued project file (if any) and the revision being issued;
* :func:`history_from_revisions` — the same from every stored revision (web app);
* :func:`make_set` — sheets → HTML → cached/parallel PDF → merged bytes.
"""

from __future__ import annotations

import time
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from server.calc.model import Project
from server.calc.projectfile import dump_project, parse_project
from server.calc.results import ProjectResult

from .deltas import Deltas, diff_projects
from .render import Progress, RenderStats, SheetCache, merge_pdfs, render_pdfs, sheet_html
from .sheets import (
    DRAFT,
    GrowthChart,
    IssueHistory,
    RevisionInfo,
    SheetSpec,
    build_sheets,
    printed_values,
    touched_sheets,
)


def compute(project: Project, include_future: bool | None = None) -> ProjectResult:
    from server.calc.engine import compute_project  # the one calculation

    return compute_project(project, include_future=include_future)


def revision_deltas(
    previous: Project,
    current: Project,
    *,
    revision: int | None,
    previous_result: ProjectResult | None = None,
    current_result: ProjectResult | None = None,
) -> Deltas:
    """Deltas between two project states, including values whose printed text changed."""
    prev_r = previous_result if previous_result is not None else compute(previous)
    cur_r = current_result if current_result is not None else compute(current)
    return diff_projects(
        dump_project(previous),
        dump_project(current),
        previous_values=printed_values(previous, prev_r),
        current_values=printed_values(current, cur_r),
        revision=revision,
    )


def history_for(
    project: Project,
    result: ProjectResult,
    *,
    current: RevisionInfo | None,
    previous: Project | None = None,
    previous_revision: RevisionInfo | None = None,
    previous_result: ProjectResult | None = None,
) -> IssueHistory:
    """History of a set issued from a project file, optionally against the previous issued file.

    Without ``current`` the set is a draft (no revision, no markers).  Without ``previous``
    the revision is a first issue: every sheet carries it and nothing is marked.
    """
    if current is None and previous is None:
        return DRAFT
    if previous is None:
        return IssueHistory(current=current, first_issue=True)
    number = current.number if current is not None else None
    deltas = revision_deltas(previous, project, revision=number, previous_result=previous_result, current_result=result)
    prev = previous_revision or RevisionInfo(
        number=(number - 1) if number is not None else 0, date="", description="previous issue"
    )
    return IssueHistory(current=current, earlier=(prev,), touched={prev.number: None}, deltas=deltas, first_issue=False)


def history_from_revisions(
    project: Project,
    result: ProjectResult,
    revisions: Sequence[tuple[RevisionInfo, Mapping[str, Any]]],
    *,
    current: RevisionInfo | None,
    growth: bool = False,
) -> IssueHistory:
    """History from stored revisions (oldest first; each with its version-1 project dict).

    ``growth``: the sets carry a load-growth sheet per service (a stored project's sets do once
    a revision is issued), so each revision also changed those sheets and their index entries.
    """
    if not revisions:
        return IssueHistory(current=current, first_issue=True) if current else DRAFT
    parsed = [(info, parse_project(data, source=f"revision {info.number}")) for info, data in revisions]
    results = [compute(p) for _, p in parsed]
    touched: dict[int, frozenset[str] | None] = {parsed[0][0].number: None}
    for k in range(1, len(parsed)):
        d = revision_deltas(
            parsed[k - 1][1],
            parsed[k][1],
            revision=parsed[k][0].number,
            previous_result=results[k - 1],
            current_result=results[k],
        )
        grown = [s.tag for s in parsed[k][1].sources] if growth else ()
        touched[parsed[k][0].number] = touched_sheets(parsed[k][1], results[k], d, grown)
    deltas = revision_deltas(
        parsed[-1][1],
        project,
        revision=current.number if current else None,
        previous_result=results[-1],
        current_result=result,
    )
    return IssueHistory(
        current=current, earlier=tuple(info for info, _ in parsed), touched=touched, deltas=deltas, first_issue=False
    )


def make_set(
    project: Project,
    result: ProjectResult,
    history: IssueHistory = DRAFT,
    *,
    select: Sequence[str] | None = None,
    cache_dir: str | Path | None = None,
    workers: int | None = None,
    progress: Progress | None = None,
    growth: Mapping[str, GrowthChart] | None = None,
) -> tuple[bytes, RenderStats]:
    """The merged PDF of the set (or of the selected sheets) and how it was made.

    ``growth``: source tag → load-growth chart (:func:`server.pdf.stored.growth_charts`); a
    set made from a bare project file has no revisions to chart and passes none.
    """
    stats = RenderStats()
    t0 = time.perf_counter()
    specs: list[SheetSpec] = build_sheets(project, result, history, select=select, growth=growth)
    paper = project.project.paper
    htmls = [sheet_html(s, paper) for s in specs]
    stats.html_s = time.perf_counter() - t0
    cache = SheetCache(cache_dir) if cache_dir is not None else None
    pdfs = render_pdfs(htmls, cache=cache, workers=workers, progress=progress, stats=stats)
    t1 = time.perf_counter()
    merged = merge_pdfs(pdfs, [f"{s.number} {s.title}" for s in specs])
    stats.merge_s = time.perf_counter() - t1
    return merged, stats
