"""Review comments on panels: add, list, resolve (the store side of server/web/routes/comments.py).

A comment belongs to a project and a panel tag, optionally to one slot; its body is plain
text (at most :data:`MAX_BODY` characters, shown autoescaped, never as HTML).  Anyone with
the ``comment`` permission may write one; its author, an engineer or an admin may resolve it.
Writes go through the service's sessionmaker, so the audit trail (server/audit.py) records
each new comment and each resolution in the same transaction.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime

from sqlalchemy import select
from sqlalchemy.orm import Session, sessionmaker

from server.auth.accounts import UserInfo
from server.auth.roles import Role
from server.db import models as db

MAX_BODY = 2000


class CommentRejected(ValueError):
    """The typed comment breaks a rule; the message names the field."""

    def __init__(self, field: str, message: str) -> None:
        self.field = field
        super().__init__(f"{field}: {message}")


class NotAllowed(PermissionError):
    """The user may not resolve this comment."""


@dataclass(frozen=True)
class CommentLine:
    id: int
    panel_tag: str
    slot: int | None
    author_id: int
    author: str
    at: datetime
    body: str
    resolved: bool
    resolved_by: str | None
    resolved_at: datetime | None


def _line(c: db.Comment) -> CommentLine:
    def aware(x: datetime | None) -> datetime | None:
        return x if x is None or x.tzinfo else x.replace(tzinfo=UTC)

    at = aware(c.created_at)
    assert at is not None
    return CommentLine(
        c.id,
        c.panel_tag,
        c.slot,
        c.author_id,
        c.author_name,
        at,
        c.body,
        c.resolved,
        c.resolved_by,
        aware(c.resolved_at),
    )


def parse_slot(text: str | None, spaces: int, tag: str) -> int | None:
    """An empty slot is a comment on the whole panel; otherwise a slot number of ``tag``."""
    if text is None or not text.strip():
        return None
    try:
        slot = int(text.strip())
    except ValueError:
        raise CommentRejected("slot", f"{text.strip()!r} is not a slot number of panel {tag}") from None
    if not 1 <= slot <= spaces:
        raise CommentRejected("slot", f"panel {tag} has slots 1 to {spaces}, not {slot}")
    return slot


def check_body(text: str | None) -> str:
    body = (text or "").strip()
    if not body:
        raise CommentRejected("body", "write the comment first (it is empty)")
    if len(body) > MAX_BODY:
        raise CommentRejected("body", f"{len(body)} characters; a comment holds at most {MAX_BODY}")
    return body


def add(
    sessions: sessionmaker[Session], *, project_id: int, panel_tag: str, slot: int | None, user: UserInfo, body: str
) -> int:
    with sessions.begin() as s:
        row = db.Comment(
            project_id=project_id,
            panel_tag=panel_tag,
            slot=slot,
            author_id=user.id,
            author_name=user.name[:60],
            body=check_body(body),
            resolved=False,
        )
        s.add(row)
        s.flush()
        return row.id


def get(sessions: sessionmaker[Session], *, project_id: int, comment_id: int) -> CommentLine | None:
    with sessions() as s:
        row = s.get(db.Comment, comment_id)
        return _line(row) if row is not None and row.project_id == project_id else None


def may_resolve(user: UserInfo, comment: CommentLine) -> bool:
    return user.role in (Role.ENGINEER, Role.ADMIN) or user.id == comment.author_id


def resolve(sessions: sessionmaker[Session], *, project_id: int, comment_id: int, user: UserInfo) -> CommentLine | None:
    """Mark a comment resolved (None: no such comment in the project); NotAllowed for others' comments."""
    with sessions.begin() as s:
        row = s.get(db.Comment, comment_id)
        if row is None or row.project_id != project_id:
            return None
        line = _line(row)
        if not may_resolve(user, line):
            raise NotAllowed(
                f"comment {comment_id} was written by {row.author_name}; only its author, an engineer or an admin "
                "may resolve it"
            )
        if not row.resolved:
            row.resolved, row.resolved_by, row.resolved_at = True, user.name[:60], datetime.now(UTC)
            s.flush()
        return _line(row)


def for_panel(sessions: sessionmaker[Session], *, project_id: int, panel_tag: str) -> list[CommentLine]:
    """Open comments first, then resolved; oldest first within each (a thread reads top down)."""
    stmt = (
        select(db.Comment)
        .where(db.Comment.project_id == project_id, db.Comment.panel_tag == panel_tag)
        .order_by(db.Comment.resolved, db.Comment.created_at, db.Comment.id)
    )
    with sessions() as s:
        return [_line(c) for c in s.scalars(stmt)]


def open_in_project(sessions: sessionmaker[Session], *, project_id: int) -> list[CommentLine]:
    stmt = (
        select(db.Comment)
        .where(db.Comment.project_id == project_id, db.Comment.resolved.is_(False))
        .order_by(db.Comment.panel_tag, db.Comment.created_at, db.Comment.id)
    )
    with sessions() as s:
        return [_line(c) for c in s.scalars(stmt)]
