"""Queries of the ``metered_load`` table (keyword-only arguments, like :mod:`server.repo.projects`)."""

from __future__ import annotations

from sqlalchemy import select, update
from sqlalchemy.orm import Session

from server.db.models import MeteredLoad


def list_metered(session: Session, *, project_id: int) -> list[MeteredLoad]:
    """Every metered load of a project, newest first."""
    stmt = (
        select(MeteredLoad)
        .where(MeteredLoad.project_id == project_id)
        .order_by(MeteredLoad.uploaded_at.desc(), MeteredLoad.id.desc())
    )
    return list(session.scalars(stmt))


def get_metered(session: Session, *, project_id: int, metered_id: int) -> MeteredLoad | None:
    row = session.get(MeteredLoad, metered_id)
    return row if row is not None and row.project_id == project_id else None


def active_overrides_va(session: Session, *, project_id: int) -> dict[str, float]:
    """node tag → existing load in VA of the active metered load (the newest if several)."""
    stmt = (
        select(MeteredLoad.node_tag, MeteredLoad.existing_load_kva)
        .where(MeteredLoad.project_id == project_id, MeteredLoad.active.is_(True))
        .order_by(MeteredLoad.id)
    )
    return {tag: kva * 1000.0 for tag, kva in session.execute(stmt)}


def deactivate_node(session: Session, *, project_id: int, node_tag: str) -> None:
    session.execute(
        update(MeteredLoad)
        .where(MeteredLoad.project_id == project_id, MeteredLoad.node_tag == node_tag)
        .values(active=False)
    )
