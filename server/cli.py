"""The ``panelwright`` command line: one entry point, one sub-command module each.

Each sub-command lives in ``server/commands/<name>.py`` and exposes ``command`` (a click
command or group).  Options can also be set from the environment with the ``PANELWRIGHT_``
prefix (click's ``auto_envvar_prefix``).  User errors exit with status 2 and a message on
stderr, never a traceback.
"""

from __future__ import annotations

import importlib
import sys

import click

from server import __version__

#: Sub-command modules, in the order ``--help`` lists them.
COMMAND_MODULES: tuple[str, ...] = (
    "calc",
    "schema",
    "sheets",
    "pdf",
    "serve",
    "db",
    "demo",
    "importfile",
    "export",
    "metered",
    "balance",
    "user",
    "backup",
    "settings",
)

#: Command name → the module defining it.  A module is imported only when one of its commands
#: runs (or for ``--help``), so ``panelwright calc`` does not load the web app, the database
#: layer or the PDF renderer.  tests/unit/test_cli.py checks this table against the modules.
COMMANDS: dict[str, str] = {
    "calc": "calc",
    "schema": "schema",
    "import-sheet": "sheets",
    "export-sheet": "sheets",
    "pdf": "pdf",
    "serve": "serve",
    "db": "db",
    "demo": "demo",
    "import": "importfile",
    "export": "export",
    "metered": "metered",
    "balance": "balance",
    "user": "user",
    "backup": "backup",
    "restore": "backup",
    "settings": "settings",
}


def module_commands(module_name: str) -> list[click.Command]:
    """The click commands a sub-command module exposes (``commands``, else its one ``command``)."""
    module = importlib.import_module(f"server.commands.{module_name}")
    return list(getattr(module, "commands", None) or [module.command])


class _LazyGroup(click.Group):
    """A group that imports a sub-command's module when that command is asked for."""

    def list_commands(self, ctx: click.Context) -> list[str]:
        return list(COMMANDS)

    def get_command(self, ctx: click.Context, cmd_name: str) -> click.Command | None:
        module_name = COMMANDS.get(cmd_name)
        if module_name is None:
            return None
        return next((c for c in module_commands(module_name) if c.name == cmd_name), None)


@click.group(cls=_LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="panelwright")
def cli() -> None:
    """Panelwright: panel schedules, load roll-up, feeder and transformer sizing.

    Results support, and never replace, the engineer of record; the adopted code edition and
    local amendments govern.
    """


def main(argv: list[str] | None = None) -> None:
    try:
        cli.main(args=argv, prog_name="panelwright", auto_envvar_prefix="PANELWRIGHT", standalone_mode=True)
    except KeyboardInterrupt:
        click.echo("interrupted", err=True)
        sys.exit(130)


if __name__ == "__main__":
    main()
