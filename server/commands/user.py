"""``panelwright user``: accounts from the server's shell (add, list, passwd, role, remove).

Passwords are asked for at a hidden prompt (twice), or read from standard input with
``--password-stdin`` for scripts; they never appear on the command line or in any log.
"""

from __future__ import annotations

import sys

import click
from sqlalchemy.orm import Session, sessionmaker

from server.auth.accounts import AccountError, add_user, list_users, remove_user, set_password, set_role
from server.config import Settings
from server.db.migrate import DatabaseNotMigrated

from . import fail

ROLES = click.Choice(["admin", "engineer", "reviewer"], case_sensitive=False)


def _sessions() -> sessionmaker[Session]:
    from server.services import Services

    try:
        return Services.from_settings(Settings()).sessions
    except DatabaseNotMigrated as exc:
        fail(str(exc))


def _password(from_stdin: bool) -> str:
    if from_stdin:
        return sys.stdin.readline().rstrip("\r\n")
    return click.prompt("Password", hide_input=True, confirmation_prompt=True)


@click.group("user")
def command() -> None:
    """Manage user accounts (admin, engineer, reviewer)."""


@command.command("add")
@click.argument("name")
@click.option("--role", type=ROLES, required=True, help="admin (users, settings), engineer (edit, issue) or reviewer")
@click.option("--password-stdin", is_flag=True, help="Read the password from the first line of standard input")
def add(name: str, role: str, password_stdin: bool) -> None:
    """Create the account NAME (prompts for the password)."""
    sessions = _sessions()
    try:
        user = add_user(sessions, name=name, role=role, password=_password(password_stdin))
    except AccountError as exc:
        fail(str(exc))
    click.echo(f"added {user.name} ({user.role})")


@command.command("list")
def list_() -> None:
    """List the accounts and their roles."""
    users = list_users(_sessions())
    if not users:
        click.echo("no accounts yet: panelwright user add NAME --role admin")
    for u in users:
        click.echo(f"{u.name}\t{u.role}")


@command.command("passwd")
@click.argument("name")
@click.option("--password-stdin", is_flag=True, help="Read the password from the first line of standard input")
def passwd(name: str, password_stdin: bool) -> None:
    """Set NAME's password (signs NAME out everywhere)."""
    try:
        set_password(_sessions(), name=name, password=_password(password_stdin))
    except AccountError as exc:
        fail(str(exc))
    click.echo(f"password of {name} changed")


@command.command("role")
@click.argument("name")
@click.argument("role", type=ROLES)
def role(name: str, role: str) -> None:
    """Give NAME the ROLE."""
    try:
        set_role(_sessions(), name=name, role=role)
    except AccountError as exc:
        fail(str(exc))
    click.echo(f"{name} is now {role.lower()}")


@command.command("remove")
@click.argument("name")
def remove(name: str) -> None:
    """Delete NAME's account (the history keeps their name)."""
    try:
        remove_user(_sessions(), name=name)
    except AccountError as exc:
        fail(str(exc))
    click.echo(f"removed {name}")
