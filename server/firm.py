"""Firm settings: the firm's defaults for new projects and their title block.

An admin keeps one set of values (the ``firm_settings`` row, :class:`server.db.models.FirmSettings`):
the firm name printed in the title block, the code edition and occupancy a new project starts
with, its voltage-drop, imbalance and growth limits, whether future loads count, and the paper
size of its sheets.  They are the :class:`~server.calc.model.ProjectInfo` fields of the same
names, and they are checked by the project file's own rules: :func:`validate` builds a project
file holding only a header and runs it through :func:`server.calc.projectfile.parse_project`, so
a value the firm may keep is exactly a value a project may hold.

Only the new-project form starts from these values (:meth:`server.services.Services.create_blank_project`);
an imported or copied project carries its own header, and changing the settings never rewrites an
existing project.  Until an admin saves them, the defaults are the project file's own.  Every save
is recorded by the audit trail (target "firm settings", with before and after).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import replace
from typing import Any

from sqlalchemy import select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session, sessionmaker

from server import versions
from server.calc import projectfile as pf
from server.calc.errors import Problem, ProjectFileError
from server.calc.model import FORMAT_NAME, FORMAT_VERSION, ProjectInfo
from server.db import models as db
from server.services import EditRejected, StaleEdit, blank_to_none

#: The settings, in the order the screen and ``panelwright settings show`` list them.
FIELDS: tuple[str, ...] = (
    "firm",
    "code",
    "occupancy",
    "vd_feeder_pct",
    "vd_total_pct",
    "imbalance_limit_pct",
    "growth_margin_pct",
    "include_future",
    "paper",
)
ROW_ID = 1
AUDIT_TARGET = "firm settings"
#: The header's required name while the firm's values are checked (never stored).
_CHECK_NAME = "firm settings"


def _plain(info: ProjectInfo) -> dict[str, Any]:
    """The settings' fields of a header, enumerations as their file strings."""
    return {k: getattr(getattr(info, k), "value", getattr(info, k)) for k in FIELDS}


def builtin_defaults() -> dict[str, Any]:
    """What a new project starts with when the firm has saved nothing: the project file's defaults."""
    return _plain(ProjectInfo(name=_CHECK_NAME))


def validate(values: Mapping[str, Any]) -> dict[str, Any]:
    """Check settings (project-file shaped; ``None`` = not given, the file's default) by the project file's rules.

    Returns the checked values; raises :class:`~server.services.EditRejected` with every problem
    keyed by the field name (``vd_feeder_pct``, ``paper`` …) and nothing else done.
    """
    unknown = sorted(k for k in values if k not in FIELDS)
    header: dict[str, Any] = {k: values.get(k) for k in FIELDS}
    header["name"] = _CHECK_NAME
    problems: list[Problem] = []
    info: ProjectInfo | None = None
    try:
        info = pf.parse_project({"format": FORMAT_NAME, "version": FORMAT_VERSION, "project": header}).project
    except ProjectFileError as exc:
        problems = [replace(p, field=p.field.removeprefix("project.")) if p.field else p for p in exc.problems]
    if unknown:
        problems.append(Problem(f"unknown setting {', '.join(unknown)}; the settings are " + ", ".join(FIELDS)))
    if problems or info is None:
        raise EditRejected(problems, values)
    return _plain(info)


def from_form(form: Mapping[str, Any]) -> dict[str, Any]:
    """The settings form's values as the project file wants them (an unticked box sends nothing)."""
    values = {k: v for k, v in blank_to_none(form).items() if k in FIELDS}
    values.setdefault("include_future", False)
    return values


def current(session: Session) -> dict[str, Any]:
    """The firm's settings as stored (the built-in defaults until first saved)."""
    row = session.get(db.FirmSettings, ROW_ID)
    if row is None:
        return builtin_defaults()
    return {k: getattr(row, k) for k in FIELDS}


def load(sessions: sessionmaker[Session]) -> dict[str, Any]:
    with sessions() as s:
        return current(s)


def version(values: Mapping[str, Any]) -> str:
    """Content version of the settings (see :mod:`server.versions`): the form carries the one it showed."""
    return versions.of_plain(versions.plain({k: values[k] for k in FIELDS}))


def save(
    sessions: sessionmaker[Session],
    values: Mapping[str, Any],
    *,
    expected_version: str | None = None,
    typed: Mapping[str, Any] | None = None,
) -> dict[str, Any]:
    """Check ``values`` (every setting; a missing one takes the file's default) and store them at once.

    Raises :class:`~server.services.EditRejected` before anything is written when a value breaks
    a rule, and :class:`~server.services.StaleEdit` when ``expected_version`` is given and someone
    saved other settings since the form was drawn (carrying ``typed``, the form as the user typed
    it, to show beside what is stored).  Only changed columns are written, so the audit
    row lists exactly what changed.
    """
    checked = validate(values)
    for attempt in range(2):
        try:
            with sessions() as s, s.begin():
                row = s.get(db.FirmSettings, ROW_ID, with_for_update=True)
                stored = current(s)
                if expected_version and version(stored) != expected_version:
                    who = s.scalar(
                        select(db.AuditEvent.user_name)
                        .where(db.AuditEvent.target == AUDIT_TARGET)
                        .order_by(db.AuditEvent.id.desc())
                        .limit(1)
                    )
                    raise StaleEdit("The firm settings", stored, 0, who or "someone else", typed or values)
                if row is None:
                    row = db.FirmSettings(id=ROW_ID)
                    s.add(row)
                for k, v in checked.items():
                    if getattr(row, k) != v:
                        setattr(row, k, v)
            return checked
        except IntegrityError:  # another admin's first save made the row meanwhile: update it instead
            if attempt:
                raise
    return checked
