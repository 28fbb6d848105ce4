"""Roles and permissions: one table says which role may do what.

``reviewer`` reads, comments on panels, compares revisions and exports history (the project manager's seat);
``engineer`` also edits and issues revisions; ``admin`` also manages users.  Routes declare
a :class:`Permission`; :func:`allows` is the only place the table is read.
"""

from __future__ import annotations

from enum import StrEnum


class Role(StrEnum):
    ADMIN = "admin"
    ENGINEER = "engineer"
    REVIEWER = "reviewer"


class Permission(StrEnum):
    PUBLIC = "public"  # no account needed (login page, static files)
    READ = "read"  # view pages, results, history, revisions; compare
    COMMENT = "comment"  # write and resolve comments on panels (review notes, not project data)
    EDIT = "edit"  # change projects, panels, circuits; import
    ISSUE = "issue"  # issue a revision
    ADMIN = "admin"  # manage users and firm settings


GRANTS: dict[Role, frozenset[Permission]] = {
    Role.REVIEWER: frozenset({Permission.PUBLIC, Permission.READ, Permission.COMMENT}),
    Role.ENGINEER: frozenset(
        {Permission.PUBLIC, Permission.READ, Permission.COMMENT, Permission.EDIT, Permission.ISSUE}
    ),
    Role.ADMIN: frozenset(Permission),
}


def allows(role: str | None, permission: Permission) -> bool:
    """True when ``role`` (None: nobody signed in) may do what ``permission`` names."""
    if permission == Permission.PUBLIC:
        return True
    if role is None:
        return False
    try:
        return permission in GRANTS[Role(role)]
    except ValueError:
        return False


def parse_role(text: str) -> Role:
    """A role from its name; ValueError naming the choices otherwise."""
    try:
        return Role(text.strip().lower())
    except ValueError:
        raise ValueError(f"unknown role {text!r}: choose admin, engineer or reviewer") from None
