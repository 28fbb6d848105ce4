"""Errors of the spreadsheet import: a refused file, always with a message a user can act on.

A :class:`SheetFileError` is raised before anything is stored; it names the file (and the
sheet, row or entry when there is one) and says what to do instead.
"""

from __future__ import annotations


class SheetFileError(Exception):
    """The uploaded file cannot be read as a spreadsheet (too big, corrupt, unsafe, wrong type)."""

    def __init__(self, message: str, *, source: str | None = None) -> None:
        self.message = message
        self.source = source
        super().__init__(self.describe())

    def describe(self) -> str:
        return f"{self.source}: {self.message}" if self.source else self.message


class MappingError(Exception):
    """A column mapping (typed by a user or given as JSON to the CLI) is not usable."""
