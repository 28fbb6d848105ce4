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
)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="panelwright")
def cli() -> None:
    """Panelwright: panel schedules, load roll-up, feeder and transformer sizing.

    Results support, and never replace, the engineer of record; the adopted code edition and
    local amendments govern.
    """


for _name in COMMAND_MODULES:
    _module = importlib.import_module(f"server.commands.{_name}")
    for _command in getattr(_module, "commands", None) or [_module.command]:  # a module may expose several
        cli.add_command(_command)


def main(argv: list[str] | None = None) -> None:
    try:
        cli.main(args=argv, prog_name="panelwright", auto_envvar_prefix="PANELWRIGHT", standalone_mode=True)
    except KeyboardInterrupt:
        click.echo("interrupted", err=True)
        sys.exit(130)


if __name__ == "__main__":
    main()
