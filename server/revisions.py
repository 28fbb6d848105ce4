"""Issued revisions: freeze, list, read, verify and compare; issued rows are never edited.

Issuing uses :meth:`server.services.Services.issue_revision` (the version-1 project file and
its results frozen as JSON with a SHA-256 over both; the PDF set reads the same rows through
:mod:`server.pdf.stored`).  Work then simply continues on the live project, which becomes
the next revision when issued.

Immutability is enforced in the service layer: :func:`install_guard` makes every session of
the app refuse to flush a change to an existing ``revisions`` row (:class:`RevisionFrozen`).

Comparing two revisions (or a revision with the current project, ``"current"``) lists the
added, removed and changed circuits, using :func:`server.pdf.deltas.diff_projects` for the
changed slots, and the demand load of each panel before and after from the frozen results.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import event, select
from sqlalchemy.orm import Session, sessionmaker

from server.calc import projectfile as pf
from server.db import models as db
from server.pdf.deltas import diff_projects
from server.services import NotFound, ServiceError, Services

CURRENT = "current"


class RevisionFrozen(ServiceError):
    """An issued revision cannot be changed."""


def _refuse_revision_updates(session: Session, _ctx: Any, _instances: Any) -> None:
    for obj in session.dirty:
        if isinstance(obj, db.Revision) and session.is_modified(obj, include_collections=False):
            raise RevisionFrozen(f"revision {obj.number} is issued and cannot be changed; issue a new revision instead")


def install_guard(sessions: sessionmaker[Session]) -> None:
    if not event.contains(sessions, "before_flush", _refuse_revision_updates):
        event.listen(sessions, "before_flush", _refuse_revision_updates)


def content_hash(project_json: str, results_json: str) -> str:
    """SHA-256 (hex) of the frozen project file followed by its frozen results, as issued."""
    return hashlib.sha256((project_json + results_json).encode("utf-8")).hexdigest()


@dataclass(frozen=True)
class RevisionSummary:
    number: int
    issued_at: datetime
    description: str
    issued_by: str
    content_hash: str


@dataclass(frozen=True)
class IssuedRevision:
    """One frozen revision; ``intact`` is False if the stored text no longer matches its hash."""

    summary: RevisionSummary
    project: dict[str, Any]
    results: dict[str, Any]
    intact: bool


def _summary(r: db.Revision) -> RevisionSummary:
    return RevisionSummary(r.number, r.issued_at, r.description, r.issued_by, r.content_hash)


def issue(services: Services, project_id: int, *, description: str, issued_by: str) -> int:
    description = description.strip()
    if len(description) > 500:
        raise ServiceError("the revision description is longer than 500 characters")
    return services.issue_revision(project_id, description=description, issued_by=issued_by)


def list_revisions(services: Services, project_id: int) -> list[RevisionSummary]:
    with services.sessions() as s:
        rows = s.scalars(select(db.Revision).where(db.Revision.project_id == project_id).order_by(db.Revision.number))
        return [_summary(r) for r in rows]


def get(services: Services, project_id: int, number: int) -> IssuedRevision:
    with services.sessions() as s:
        r = s.scalars(
            select(db.Revision).where(db.Revision.project_id == project_id, db.Revision.number == number)
        ).first()
        if r is None:
            raise NotFound(f"project {project_id} has no revision {number}")
        return IssuedRevision(
            _summary(r),
            json.loads(r.project_json),
            json.loads(r.results_json),
            content_hash(r.project_json, r.results_json) == r.content_hash,
        )


@dataclass(frozen=True)
class CircuitChange:
    panel: str
    slot: int
    kind: str  # "added", "removed", "changed"
    before: dict[str, Any] | None
    after: dict[str, Any] | None

    @property
    def fields(self) -> list[str]:
        if self.before is None or self.after is None:
            return []
        keys = sorted(set(self.before) | set(self.after))
        return [k for k in keys if self.before.get(k) != self.after.get(k)]


@dataclass(frozen=True)
class PanelLoad:
    panel: str
    before_va: float | None  # demand load (NEC Article 220) at the panel, None where the panel is absent
    after_va: float | None

    @property
    def change_va(self) -> float | None:
        if self.before_va is None or self.after_va is None:
            return None
        return self.after_va - self.before_va


@dataclass(frozen=True)
class Comparison:
    a: str
    b: str
    circuits: list[CircuitChange]
    panels_added: list[str]
    panels_removed: list[str]
    loads: list[PanelLoad]


def _state(services: Services, project_id: int, which: str) -> tuple[dict[str, Any], dict[str, Any]]:
    if which == CURRENT:
        snap = services.snapshot(project_id)
        return pf.dump_project(snap.model), snap.result.to_json()
    try:
        number = int(which)
    except ValueError:
        raise ServiceError(f"{which!r} is not a revision number (or 'current')") from None
    rev = get(services, project_id, number)
    return rev.project, rev.results


def _circuits(data: dict[str, Any]) -> dict[tuple[str, int], dict[str, Any]]:
    return {(p["tag"], int(c["slot"])): c for p in data.get("panels", []) for c in p.get("circuits", [])}


def compare(services: Services, project_id: int, a: str, b: str) -> Comparison:
    """What changed from ``a`` to ``b`` (revision numbers or ``"current"``)."""
    before, before_res = _state(services, project_id, a)
    after, after_res = _state(services, project_id, b)
    deltas = diff_projects(before, after)
    old_c, new_c = _circuits(before), _circuits(after)
    old_tags = [p["tag"] for p in before.get("panels", [])]
    new_tags = [p["tag"] for p in after.get("panels", [])]
    changes: list[CircuitChange] = []
    for key in sorted(deltas.circuits):
        o, n = old_c.get(key), new_c.get(key)
        kind = "added" if o is None else "removed" if n is None else "changed"
        changes.append(CircuitChange(key[0], key[1], kind, o, n))
    loads = []
    for tag in dict.fromkeys([*old_tags, *new_tags]):
        bv = (before_res.get("panels", {}).get(tag) or {}).get("demand_va")
        av = (after_res.get("panels", {}).get(tag) or {}).get("demand_va")
        loads.append(PanelLoad(tag, bv, av))
    return Comparison(
        a,
        b,
        changes,
        [t for t in new_tags if t not in old_tags],
        [t for t in old_tags if t not in new_tags],
        loads,
    )
