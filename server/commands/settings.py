"""``panelwright settings``: the firm settings from the server's shell (show, set).

The same values as the admin's Firm settings page (:mod:`server.firm`): the defaults a project
made with "New project" starts with.  ``set`` checks the value by the project file's rules and
writes nothing when it is refused (exit status 2); each change is in the audit trail under the
shell's login name (``cli:<name>``).
"""

from __future__ import annotations

import click
from sqlalchemy.orm import Session, sessionmaker

from server.config import Settings
from server.db.migrate import DatabaseNotMigrated

from . import fail


def _sessions() -> sessionmaker[Session]:
    from server.services import Services

    try:
        return Services.from_settings(Settings()).sessions
    except DatabaseNotMigrated as exc:
        fail(str(exc))


def _text(value: object) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


@click.group("settings")
def command() -> None:
    """Firm settings: the defaults new projects start with (firm name, paper, code edition, limits)."""


@command.command("show")
def show() -> None:
    """Print each setting and its value (KEY<TAB>VALUE)."""
    from server import firm

    for key, value in firm.load(_sessions()).items():
        click.echo(f"{key}\t{_text(value)}")


@command.command("set", context_settings={"ignore_unknown_options": True})  # "-1" is a value, not an option
@click.argument("key")
@click.argument("value")
def set_(key: str, value: str) -> None:
    """Set KEY to VALUE (an empty VALUE takes the project file's default).

    \b
    Keys: firm, code, occupancy, vd_feeder_pct, vd_total_pct, imbalance_limit_pct,
    growth_margin_pct, include_future (true/false), paper.
    """
    from server import firm
    from server.services import EditRejected

    name = key.strip().replace("-", "_")
    if name not in firm.FIELDS:
        fail(f"unknown setting {key!r}; the settings are " + ", ".join(firm.FIELDS))
    sessions = _sessions()
    values = firm.load(sessions)
    old = values[name]
    values[name] = value.strip() or None
    try:
        saved = firm.save(sessions, values)
    except EditRejected as exc:
        fail(f"{name} not changed: {exc.by_field().get(name) or exc}")
    click.echo(f"{name}: {_text(old)} -> {_text(saved[name])}")
