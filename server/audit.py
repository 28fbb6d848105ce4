"""The audit trail: every change to a project, an account or the firm settings records who, when, what.

What is the changed fields before and after, as JSON.

One listener on the service's sessionmaker (:func:`install`) sees every flush, whichever code
made it (editor, API, import, spreadsheet, CLI), and writes one ``audit_events`` row per
created, changed or deleted element in the same transaction as the change itself, so an
acknowledged edit and its audit row are committed together or not at all.

Who: :data:`ACTOR`, a context variable the web middleware sets to the signed-in user for each
request; the CLI leaves its default, ``cli:<login name>``.  Bookkeeping columns (ids, positions,
``version``, ``data_version``, timestamps) are not reported, and a flush that changes nothing
else records nothing.  A new project is one "create" row (not one per circuit); the children
of a deleted panel go with its "delete" row.
"""

from __future__ import annotations

import csv
import getpass
import io
import json
import weakref
from contextvars import ContextVar
from dataclasses import dataclass
from datetime import UTC, date, datetime, time, timedelta
from typing import Any

from sqlalchemy import event, func, insert, inspect, or_, select
from sqlalchemy.orm import Session, sessionmaker

from server.db import models as db


def _default_actor() -> str:
    try:
        return f"cli:{getpass.getuser()}"
    except Exception:  # no login name in some containers
        return "cli"


_CLI_ACTOR = _default_actor()
ACTOR: ContextVar[str] = ContextVar("panelwright_actor", default=_CLI_ACTOR)

_KINDS: dict[type, str] = {
    db.Project: "project",
    db.Source: "source",
    db.Transformer: "transformer",
    db.Panel: "panel",
    db.Circuit: "circuit",
    db.Revision: "revision",
    db.User: "user",
    db.Comment: "comment",
    db.FirmSettings: "firm settings",
}
_IGNORED = frozenset(
    {"id", "project_id", "panel_id", "position", "version", "data_version", "created_at", "updated_at"}
)
_SECRET = frozenset({"password_hash", "password_changed_at"})


def _jsonable(value: Any) -> Any:
    if isinstance(value, datetime):
        return value.isoformat()
    return value


def _columns(obj: Any) -> list[str]:
    return [a.key for a in inspect(type(obj)).column_attrs if a.key not in _IGNORED and a.key not in _SECRET]


def _values(obj: Any) -> dict[str, Any]:
    state = inspect(obj)
    return {k: _jsonable(state.dict[k]) for k in _columns(obj) if k in state.dict}


def _changes(obj: Any) -> tuple[dict[str, Any], dict[str, Any]]:
    state = inspect(obj)
    before: dict[str, Any] = {}
    after: dict[str, Any] = {}
    for key in _columns(obj):
        hist = state.attrs[key].history
        if not hist.added and not hist.deleted:
            continue
        old = hist.deleted[0] if hist.deleted else None
        new = hist.added[0] if hist.added else None
        if old != new:
            before[key], after[key] = _jsonable(old), _jsonable(new)
    if isinstance(obj, db.User) and state.attrs["password_hash"].history.added:
        after["password"] = "changed"
        before.setdefault("password", "")
    return before, after


#: Per engine: panel id → (project id, tag).  A panel row never changes project or tag (a
#: renamed panel is a new row with a new id), so an entry stays true for its engine's database;
#: the bound only limits memory.
_PANEL_PLACES: weakref.WeakKeyDictionary[Any, dict[int, tuple[int, str]]] = weakref.WeakKeyDictionary()
_PANEL_PLACES_MAX = 100_000


class _Places:
    """Panel id → (project id, tag): from the flush's own objects, the engine's cache, or one query."""

    def __init__(self, session: Session) -> None:
        self.session = session
        self.cache: dict[int, tuple[int | None, str | None]] = {}
        try:
            self.known = _PANEL_PLACES.setdefault(session.get_bind(), {})
        except TypeError:  # a bind that cannot be weakly referenced: no cache across flushes
            self.known = {}

    def panel(self, panel_id: int | None, obj: Any = None) -> tuple[int | None, str | None]:
        if panel_id is None:
            return (None, None)
        if panel_id not in self.cache and panel_id in self.known:
            self.cache[panel_id] = self.known[panel_id]
        if panel_id not in self.cache:
            p = obj if obj is not None else self.session.identity_map.get(self.session.identity_key(db.Panel, panel_id))  # type: ignore[arg-type]
            if p is not None:
                self.cache[panel_id] = (inspect(p).dict.get("project_id"), inspect(p).dict.get("tag"))
            else:
                row = (
                    self.session.connection()
                    .execute(select(db.Panel.project_id, db.Panel.tag).where(db.Panel.id == panel_id))
                    .first()
                )
                self.cache[panel_id] = (row[0], row[1]) if row else (None, None)
            pid, tag = self.cache[panel_id]
            if pid is not None and tag is not None:
                if len(self.known) >= _PANEL_PLACES_MAX:
                    self.known.clear()
                self.known[panel_id] = (pid, tag)
        return self.cache[panel_id]


def _where(obj: Any, places: _Places) -> tuple[int | None, str | None, str]:
    d = inspect(obj).dict
    if isinstance(obj, db.Circuit):
        panel = d.get("panel")
        pid, tag = places.panel(d.get("panel_id") or (panel.id if panel is not None else None), panel)
        if tag is None and panel is not None:
            pid, tag = inspect(panel).dict.get("project_id"), inspect(panel).dict.get("tag")
        return pid, tag, f"{tag} circuit {d.get('slot')}"
    if isinstance(obj, db.Panel):
        return d.get("project_id"), d.get("tag"), f"panel {d.get('tag')}"
    if isinstance(obj, db.Transformer):
        return d.get("project_id"), None, f"transformer {d.get('tag')}"
    if isinstance(obj, db.Source):
        return d.get("project_id"), None, f"source {d.get('tag')}"
    if isinstance(obj, db.Revision):
        return d.get("project_id"), None, f"revision {d.get('number')}"
    if isinstance(obj, db.Project):
        return d.get("id"), None, f"project {d.get('number') or d.get('name')}"
    if isinstance(obj, db.User):
        return None, None, f"user {d.get('name')}"
    if isinstance(obj, db.FirmSettings):
        return None, None, "firm settings"
    if isinstance(obj, db.Comment):
        slot = d.get("slot")
        at = f"{d.get('panel_tag')}" + (f" slot {slot}" if slot is not None else "")
        return d.get("project_id"), d.get("panel_tag"), f"comment {d.get('id') or ''} on {at}".replace("  ", " ")
    return None, None, type(obj).__name__


def _parent(obj: Any) -> Any:
    d = inspect(obj).dict
    if isinstance(obj, db.Circuit):
        return d.get("panel")
    return d.get("project")


def _after_flush(session: Session, _ctx: Any) -> None:
    tracked = [o for o in (*session.new, *session.dirty, *session.deleted) if type(o) in _KINDS]
    if not tracked:
        return
    new, deleted = set(session.new), set(session.deleted)
    places = _Places(session)
    actor = ACTOR.get()
    now = datetime.now(UTC)
    rows: list[dict[str, Any]] = []
    for obj in tracked:
        parent = _parent(obj)
        if obj in new:
            if parent is not None and (parent in new or (_parent(parent) is not None and _parent(parent) in new)):
                continue  # part of a new project or panel: its own "create" row says it
            action, before, after = "create", None, _values(obj)
            if isinstance(obj, db.Revision):
                action = "issue"
                after = {k: after.get(k) for k in ("number", "description", "issued_by", "content_hash")}
            elif isinstance(obj, db.Project):
                after = {k: after.get(k) for k in ("number", "name", "client")}
        elif obj in deleted:
            if parent is not None and parent in deleted:
                continue
            action, before, after = "delete", _values(obj), None
        else:
            before, after = _changes(obj)
            if not after:
                continue
            action = "update"
        pid, tag, target = _where(obj, places)
        if isinstance(obj, db.Project) and pid is None:
            pid = inspect(obj).identity[0] if inspect(obj).identity else None
        rows.append(_row(now, actor, pid, tag, action, target, before, after))
    if rows:
        session.connection().execute(insert(db.AuditEvent), rows)


def _row(
    at: datetime,
    actor: str,
    project_id: int | None,
    panel_tag: str | None,
    action: str,
    target: str,
    before: dict[str, Any] | None,
    after: dict[str, Any] | None,
) -> dict[str, Any]:
    return {
        "at": at,
        "user_name": actor[:60],
        "project_id": project_id,
        "panel_tag": panel_tag,
        "action": action,
        "target": target[:120],
        "before_json": None if before is None else json.dumps(before, sort_keys=True, default=str),
        "after_json": None if after is None else json.dumps(after, sort_keys=True, default=str),
    }


def record(
    session: Session,
    *,
    project_id: int | None,
    panel_tag: str | None,
    action: str,
    target: str,
    before: dict[str, Any] | None,
    after: dict[str, Any] | None,
) -> None:
    """One audit row for a change written with plain statements (no flush sees it), by the
    request's actor, in the session's transaction."""
    row = _row(datetime.now(UTC), ACTOR.get(), project_id, panel_tag, action, target, before, after)
    session.connection().execute(insert(db.AuditEvent), [row])


def record_circuit_update(
    session: Session, *, project_id: int, tag: str, slot: int, before: dict[str, Any], after: dict[str, Any]
) -> None:
    """The audit row of a circuit changed by a plain UPDATE (the circuit-edit path writes without
    loading the row): the same row the flush hook writes for an ORM update."""
    record(
        session,
        project_id=project_id,
        panel_tag=tag,
        action="update",
        target=f"{tag} circuit {slot}",
        before=before,
        after=after,
    )


def install(sessions: sessionmaker[Session]) -> None:
    """Record every flush of sessions made by ``sessions`` (idempotent)."""
    if not event.contains(sessions, "after_flush", _after_flush):
        event.listen(sessions, "after_flush", _after_flush)


# --------------------------------------------------------------------------- reading


@dataclass(frozen=True)
class AuditLine:
    id: int
    at: datetime
    user: str
    project_id: int | None
    panel: str | None
    action: str
    target: str
    before: dict[str, Any] | None
    after: dict[str, Any] | None

    @property
    def fields(self) -> list[str]:
        keys = list((self.after or {}).keys()) or list((self.before or {}).keys())
        return keys


@dataclass(frozen=True)
class AuditFilter:
    """History filters: by user, panel tag, kind of thing changed and date range (inclusive days, UTC)."""

    user: str = ""
    panel: str = ""
    since: date | None = None
    until: date | None = None
    kind: str = ""  # "user", "firm settings" …: the target's first words (see SITE_KINDS)


#: The kinds of change that belong to no project, as the site-wide history offers them: a row's
#: target starts with its kind ("user jules", "firm settings").
SITE_KINDS: tuple[str, ...] = (_KINDS[db.User], _KINDS[db.FirmSettings])


def parse_day(text: str | None, name: str) -> date | None:
    """``YYYY-MM-DD`` or empty; ValueError naming the field otherwise."""
    if not text or not text.strip():
        return None
    try:
        return date.fromisoformat(text.strip())
    except ValueError:
        raise ValueError(f"{name}: {text!r} is not a date (write YYYY-MM-DD)") from None


def parse_filter(
    user: str, panel: str, since: str, until: str, kind: str = "", *, kinds: tuple[str, ...] = ()
) -> tuple[AuditFilter, str]:
    """The history filters as typed in a query string, and a message naming the field when one is
    wrong (then the dates and kind are dropped, so the page still lists something)."""
    user, panel, kind = user.strip(), panel.strip(), kind.strip()
    try:
        if kind and kind not in kinds:
            raise ValueError(f"what: {kind!r} is not one of " + ", ".join(kinds or ("(none here)",)))
        return AuditFilter(user, panel, parse_day(since, "from"), parse_day(until, "to"), kind), ""
    except ValueError as exc:
        return AuditFilter(user, panel), str(exc)


def _select(stmt: Any, *, project_id: int | None, site: bool, filt: AuditFilter, target: str | None) -> Any:
    """``stmt`` narrowed to one project (or, ``site``, to the rows of no project) and the filters."""
    if site:
        stmt = stmt.where(db.AuditEvent.project_id.is_(None))
    elif project_id is not None:
        stmt = stmt.where(db.AuditEvent.project_id == project_id)
    if target is not None:
        stmt = stmt.where(db.AuditEvent.target == target)
    if filt.user:
        stmt = stmt.where(db.AuditEvent.user_name == filt.user)
    if filt.panel:
        stmt = stmt.where(db.AuditEvent.panel_tag == filt.panel)
    if filt.kind:
        # kinds are our own fixed words (no LIKE wildcards in them)
        stmt = stmt.where(or_(db.AuditEvent.target == filt.kind, db.AuditEvent.target.like(filt.kind + " %")))
    if filt.since:
        stmt = stmt.where(db.AuditEvent.at >= datetime.combine(filt.since, time.min, UTC))
    if filt.until:
        stmt = stmt.where(db.AuditEvent.at < datetime.combine(filt.until + timedelta(days=1), time.min, UTC))
    return stmt


def events(
    sessions: sessionmaker[Session],
    *,
    project_id: int | None,
    filt: AuditFilter = AuditFilter(),
    limit: int = 500,
    target: str | None = None,
    site: bool = False,
    offset: int = 0,
) -> list[AuditLine]:
    """Newest first; ``target`` keeps only the changes of one thing (e.g. "firm settings"); ``site``
    keeps only the changes that belong to no project (accounts, firm settings); ``offset`` skips
    that many (a page of the list)."""
    stmt = _select(
        select(db.AuditEvent).order_by(db.AuditEvent.at.desc(), db.AuditEvent.id.desc()),
        project_id=project_id,
        site=site,
        filt=filt,
        target=target,
    )
    if limit:
        stmt = stmt.limit(limit)
    if offset:
        stmt = stmt.offset(offset)
    with sessions() as s:
        return [
            AuditLine(
                e.id,
                e.at if e.at.tzinfo else e.at.replace(tzinfo=UTC),
                e.user_name,
                e.project_id,
                e.panel_tag,
                e.action,
                e.target,
                json.loads(e.before_json) if e.before_json else None,
                json.loads(e.after_json) if e.after_json else None,
            )
            for e in s.scalars(stmt)
        ]


def count(
    sessions: sessionmaker[Session], *, project_id: int | None, filt: AuditFilter = AuditFilter(), site: bool = False
) -> int:
    """How many rows :func:`events` would list without a limit (for "page 2 of 7")."""
    stmt = _select(
        select(func.count()).select_from(db.AuditEvent), project_id=project_id, site=site, filt=filt, target=None
    )
    with sessions() as s:
        return int(s.scalar(stmt) or 0)


def users_in(sessions: sessionmaker[Session], *, project_id: int | None, site: bool = False) -> list[str]:
    """Who made the changes of one project (or, ``site``, of no project): the user filter's choices."""
    stmt = _select(
        select(db.AuditEvent.user_name).distinct().order_by(db.AuditEvent.user_name),
        project_id=project_id,
        site=site,
        filt=AuditFilter(),
        target=None,
    )
    with sessions() as s:
        return list(s.scalars(stmt))


def to_csv(lines: list[AuditLine]) -> str:
    """One row per event: when (UTC ISO), user, action, panel, target, before and after JSON."""
    out = io.StringIO()
    w = csv.writer(out)
    w.writerow(["at_utc", "user", "action", "panel", "target", "before", "after"])
    for e in lines:
        w.writerow(
            [
                e.at.astimezone(UTC).isoformat(timespec="seconds"),
                _cell(e.user),
                e.action,
                _cell(e.panel or ""),
                _cell(e.target),
                _cell(json.dumps(e.before, sort_keys=True)) if e.before is not None else "",
                _cell(json.dumps(e.after, sort_keys=True)) if e.after is not None else "",
            ]
        )
    return out.getvalue()


def _cell(text: str) -> str:
    """Neutralise spreadsheet formulas in typed text (OWASP CSV injection guidance, from memory)."""
    return "'" + text if text[:1] in ("=", "+", "-", "@", "\t", "\r") else text


def newest_change(sessions: sessionmaker[Session]) -> datetime | None:
    """When the database last changed (newest audit row or project update), for restore's check."""
    with sessions() as s:
        a = s.scalar(select(func.max(db.AuditEvent.at)))
        p = s.scalar(select(func.max(db.Project.updated_at)))
    stamps = [x if x.tzinfo else x.replace(tzinfo=UTC) for x in (a, p) if x is not None]
    return max(stamps, default=None)
