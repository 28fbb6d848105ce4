"""Queries of projects and the elements in them.  Keyword-only arguments; no business rules."""

from __future__ import annotations

from sqlalchemy import func, select, update
from sqlalchemy.orm import Session, selectinload

from server.db.models import Circuit, Panel, Project, Revision, Transformer, utcnow


def list_projects(session: Session, *, include_archived: bool = False) -> list[Project]:
    stmt = select(Project).order_by(Project.archived, Project.number, Project.id)
    if not include_archived:
        stmt = stmt.where(Project.archived.is_(False))
    return list(session.scalars(stmt))


def get_project(session: Session, *, project_id: int) -> Project | None:
    return session.get(Project, project_id)


def load_project_tree(session: Session, *, project_id: int) -> Project | None:
    """The project with every source, transformer, panel and circuit loaded in four queries."""
    stmt = (
        select(Project)
        .where(Project.id == project_id)
        .options(
            selectinload(Project.sources),
            selectinload(Project.transformers),
            selectinload(Project.panels).selectinload(Panel.circuits),
        )
        .execution_options(populate_existing=True)
    )
    return session.scalars(stmt).first()


def find_project(session: Session, *, key: str) -> Project | None:
    """A project by its number (active ones first) or, failing that, by its numeric id."""
    key = key.strip()
    stmt = select(Project).where(Project.number == key).order_by(Project.archived, Project.id)
    found = session.scalars(stmt).first()
    if found is None and key.isdigit():
        found = session.get(Project, int(key))
    return found


def projects_with_number(session: Session, *, number: str) -> list[Project]:
    return list(session.scalars(select(Project).where(Project.number == number).order_by(Project.id)))


def data_version(session: Session, *, project_id: int) -> int | None:
    return session.scalar(select(Project.data_version).where(Project.id == project_id))


def claim_next_version(session: Session, *, project_id: int) -> int | None:
    """Add one to ``data_version`` and return the new value (None: no such project).

    The UPDATE takes the project's write lock (a row lock on PostgreSQL, the database write
    lock on SQLite) until the transaction ends, so concurrent writers queue instead of failing.
    """
    stmt = (
        update(Project)
        .where(Project.id == project_id)
        .values(data_version=Project.data_version + 1, updated_at=utcnow())
        .returning(Project.data_version)
    )
    # On the session's connection (same transaction): a plain UPDATE, without the ORM's bulk-update
    # bookkeeping, on the hot path of every circuit edit.  No Project object is in this session yet.
    return session.connection().execute(stmt).scalar()


def bump_data_version(session: Session, *, project_id: int, expected: int) -> bool:
    """Move ``data_version`` from ``expected`` to ``expected + 1``; False if another writer got there first."""
    result = session.execute(
        update(Project)
        .where(Project.id == project_id, Project.data_version == expected)
        .values(data_version=expected + 1, updated_at=utcnow())
        .execution_options(synchronize_session=False)
    )
    return result.rowcount == 1


def get_panel(session: Session, *, project_id: int, tag: str) -> Panel | None:
    return session.scalars(select(Panel).where(Panel.project_id == project_id, Panel.tag == tag)).first()


def get_transformer(session: Session, *, project_id: int, tag: str) -> Transformer | None:
    return session.scalars(
        select(Transformer).where(Transformer.project_id == project_id, Transformer.tag == tag)
    ).first()


def panel_id(session: Session, *, project_id: int, tag: str) -> int | None:
    return session.scalar(select(Panel.id).where(Panel.project_id == project_id, Panel.tag == tag))


def find_circuit(session: Session, *, project_id: int, tag: str, slot: int) -> Circuit | None:
    """The circuit at ``slot`` of panel ``tag`` in one query."""
    stmt = (
        select(Circuit)
        .join(Panel, Circuit.panel_id == Panel.id)
        .where(Panel.project_id == project_id, Panel.tag == tag, Circuit.slot == slot)
    )
    return session.scalars(stmt).first()


def get_circuit(session: Session, *, panel_id: int, slot: int) -> Circuit | None:
    return session.scalars(select(Circuit).where(Circuit.panel_id == panel_id, Circuit.slot == slot)).first()


def next_revision_number(session: Session, *, project_id: int) -> int:
    current = session.scalar(select(func.max(Revision.number)).where(Revision.project_id == project_id))
    return (current or 0) + 1


def list_revisions(session: Session, *, project_id: int) -> list[Revision]:
    return list(session.scalars(select(Revision).where(Revision.project_id == project_id).order_by(Revision.number)))
