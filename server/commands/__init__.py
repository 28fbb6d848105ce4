"""Sub-commands of the ``panelwright`` CLI (see :mod:`server.cli`)."""

from __future__ import annotations

import sys
from typing import NoReturn

import click

CAUTION = (
    "Results support, and never replace, the engineer of record's judgement. "
    "The adopted code edition and local amendments govern."
)


def fail(message: str, code: int = 2) -> NoReturn:
    """Print a user error on stderr and exit with ``code`` (2 for bad input): never a traceback."""
    click.echo(f"panelwright: {message}", err=True)
    sys.exit(code)
