"""Named errors of the calculation layer.

Every problem names what is wrong in the terms a user can find: the file,
the element tag (panel, transformer or source), the slot and the field.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a project file or an edit."""

    message: str
    tag: str | None = None
    slot: int | None = None
    field: str | None = None

    def where(self) -> str:
        parts = []
        if self.tag:
            parts.append(self.tag)
        if self.slot is not None:
            parts.append(f"slot {self.slot}")
        if self.field:
            parts.append(self.field)
        return ", ".join(parts)

    def describe(self) -> str:
        where = self.where()
        return f"{where}: {self.message}" if where else self.message


class CalcError(Exception):
    """Base class of every error raised by ``server.calc``."""


class ProjectFileError(CalcError):
    """The project data breaks one or more rules of the version-1 project file."""

    def __init__(self, problems: list[Problem], *, source: str | None = None) -> None:
        self.problems = list(problems)
        self.source = source
        super().__init__(self.describe())

    def describe(self) -> str:
        head = f"{self.source}: " if self.source else ""
        lines = [p.describe() for p in self.problems]
        if len(lines) == 1:
            return head + lines[0]
        return head + f"{len(lines)} problems:\n" + "\n".join(f"  - {line}" for line in lines)


class UnknownSystemError(CalcError):
    """A system string is not one of the accepted forms."""


class SizingError(CalcError):
    """No standard size satisfies a requirement (e.g. a load beyond every table row)."""


class MeteredDataError(CalcError):
    """A metered-demand CSV (or reading list) cannot be used: names the file and what is wrong.

    ``bad_rows`` holds ``(line, reason)`` pairs when the refusal is about malformed rows
    (strict import, or no usable row at all).
    """

    def __init__(self, message: str, *, source: str | None = None, bad_rows: tuple[tuple[int, str], ...] = ()) -> None:
        self.source = source
        self.bad_rows = tuple(bad_rows)
        super().__init__(f"{source}: {message}" if source else message)
