"""server.cli: one entry point whose sub-command modules load only when used."""

from __future__ import annotations

import subprocess
import sys

from click.testing import CliRunner

from server.cli import COMMAND_MODULES, COMMANDS, cli, module_commands


def test_the_command_table_matches_the_modules() -> None:
    found = {c.name: m for m in COMMAND_MODULES for c in module_commands(m)}
    assert found == COMMANDS
    assert set(COMMANDS.values()) == set(COMMAND_MODULES)


def test_help_lists_every_command_and_an_unknown_one_is_refused() -> None:
    res = CliRunner().invoke(cli, ["--help"], prog_name="panelwright")
    assert res.exit_code == 0
    for name in COMMANDS:
        assert f"  {name} " in res.output
    res = CliRunner().invoke(cli, ["no-such-command"], prog_name="panelwright")
    assert res.exit_code == 2 and "No such command 'no-such-command'" in res.output


def test_calc_does_not_load_the_web_app_database_or_pdf_layers() -> None:
    code = (
        "import sys; from server.cli import cli; cli.get_command(None, 'calc'); "
        "print(sorted(m for m in ('fastapi', 'sqlalchemy', 'weasyprint', 'alembic') if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
