"""Users and signed-in sessions in the database.  Keyword-only functions on a sessionmaker.

A session cookie carries a random token signed with the server key (itsdangerous); the
database keeps only the token's SHA-256, so a copied database cannot sign anyone in.  A new
token is made at every sign-in (no session fixation) and the row is deleted at sign-out.
"""

from __future__ import annotations

import hashlib
import re
import secrets
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta

from sqlalchemy import delete, func, select
from sqlalchemy.orm import Session, sessionmaker

from server.db.models import AuthSession, ServerKey, User, utcnow

from .passwords import DUMMY_HASH, check_strength, hash_password, verify_password
from .roles import Role, parse_role

NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,59}$")


class AccountError(ValueError):
    """A user-caused problem with an account (bad name, role or password; unknown user)."""


@dataclass(frozen=True)
class UserInfo:
    """Who is making a request."""

    id: int
    name: str
    role: str

    @property
    def is_admin(self) -> bool:
        return self.role == Role.ADMIN


#: The built-in user of single-user mode (not stored: nobody can sign in as it).
LOCAL_USER = UserInfo(0, "local", Role.ADMIN)


def check_name(name: str) -> str:
    name = name.strip()
    if not NAME_RE.match(name):
        raise AccountError(
            f"user name {name!r} is not allowed: 1–60 letters, digits, '.', '_' or '-', starting with a letter or digit"
        )
    if name == LOCAL_USER.name:
        raise AccountError("the name 'local' is reserved for single-user mode")
    return name


def _role(text: str) -> Role:
    try:
        return parse_role(text)
    except ValueError as exc:
        raise AccountError(str(exc)) from None


def _password(password: str) -> str:
    problem = check_strength(password)
    if problem:
        raise AccountError(problem)
    return hash_password(password)


def add_user(sessions: sessionmaker[Session], *, name: str, role: str, password: str) -> UserInfo:
    name, role_ = check_name(name), _role(role)
    pw_hash = _password(password)
    with sessions() as s, s.begin():
        if s.scalar(select(User.id).where(User.name == name)) is not None:
            raise AccountError(f"user {name} already exists")
        row = User(name=name, role=role_.value, password_hash=pw_hash)
        s.add(row)
        s.flush()
        return UserInfo(row.id, row.name, row.role)


def list_users(sessions: sessionmaker[Session]) -> list[UserInfo]:
    with sessions() as s:
        return [UserInfo(u.id, u.name, u.role) for u in s.scalars(select(User).order_by(User.name))]


def count_users(sessions: sessionmaker[Session]) -> int:
    with sessions() as s:
        return int(s.scalar(select(func.count(User.id))) or 0)


def _get(s: Session, name: str) -> User:
    row = s.scalars(select(User).where(User.name == name.strip())).first()
    if row is None:
        raise AccountError(f"there is no user {name!r}")
    return row


def _admins_left(s: Session, without: int) -> int:
    return int(s.scalar(select(func.count(User.id)).where(User.role == Role.ADMIN, User.id != without)) or 0)


def set_password(sessions: sessionmaker[Session], *, name: str, password: str) -> None:
    """Change a password and sign that user out everywhere."""
    pw_hash = _password(password)
    with sessions() as s, s.begin():
        row = _get(s, name)
        row.password_hash = pw_hash
        row.password_changed_at = utcnow()
        s.execute(delete(AuthSession).where(AuthSession.user_id == row.id))


def set_role(sessions: sessionmaker[Session], *, name: str, role: str) -> None:
    role_ = _role(role)
    with sessions() as s, s.begin():
        row = _get(s, name)
        if row.role == Role.ADMIN and role_ != Role.ADMIN and _admins_left(s, row.id) == 0:
            raise AccountError(f"{row.name} is the last admin; make someone else admin first")
        row.role = role_.value


def remove_user(sessions: sessionmaker[Session], *, name: str) -> None:
    with sessions() as s, s.begin():
        row = _get(s, name)
        if row.role == Role.ADMIN and _admins_left(s, row.id) == 0:
            raise AccountError(f"{row.name} is the last admin; make someone else admin first")
        s.execute(delete(AuthSession).where(AuthSession.user_id == row.id))
        s.delete(row)


def authenticate(sessions: sessionmaker[Session], *, name: str, password: str) -> UserInfo | None:
    """The user when ``password`` is right; None otherwise (same work whether or not the name exists)."""
    with sessions() as s:
        row = s.scalars(select(User).where(User.name == name.strip())).first()
        if row is None:
            verify_password(DUMMY_HASH, password)
            return None
        if not verify_password(row.password_hash, password):
            return None
        return UserInfo(row.id, row.name, row.role)


# --------------------------------------------------------------------------- sessions


def token_key(token: str) -> str:
    return hashlib.sha256(token.encode("ascii", "replace")).hexdigest()


def new_token() -> str:
    return secrets.token_urlsafe(32)


def start_session(sessions: sessionmaker[Session], *, user_id: int, hours: float, address: str) -> str:
    """A fresh token for ``user_id`` valid for ``hours``; expired rows are swept on the way."""
    token = new_token()
    now = datetime.now(UTC)
    with sessions() as s, s.begin():
        s.execute(delete(AuthSession).where(AuthSession.expires_at < now))
        s.add(
            AuthSession(
                id=token_key(token),
                user_id=user_id,
                created_at=now,
                expires_at=now + timedelta(hours=hours),
                address=address[:64],
            )
        )
    return token


def session_user(sessions: sessionmaker[Session], *, token: str) -> UserInfo | None:
    """The user signed in with ``token``, or None (unknown or expired)."""
    with sessions() as s:
        row = s.execute(
            select(User.id, User.name, User.role, AuthSession.expires_at)
            .join(AuthSession, AuthSession.user_id == User.id)
            .where(AuthSession.id == token_key(token))
        ).first()
    if row is None:
        return None
    expires = row.expires_at if row.expires_at.tzinfo else row.expires_at.replace(tzinfo=UTC)
    if expires <= datetime.now(UTC):
        return None
    return UserInfo(row.id, row.name, row.role)


def end_session(sessions: sessionmaker[Session], *, token: str) -> None:
    with sessions() as s, s.begin():
        s.execute(delete(AuthSession).where(AuthSession.id == token_key(token)))


def server_secret(sessions: sessionmaker[Session], configured: str | None) -> str:
    """The configured secret, else the one this database made for itself on first use."""
    if configured:
        return configured
    with sessions() as s, s.begin():
        row = s.get(ServerKey, "session")
        if row is None:
            row = ServerKey(name="session", value=secrets.token_hex(32))
            s.add(row)
        return row.value
