"""Spreadsheet import and export of panel circuit tables (XLSX and CSV).

The pieces, in the order an import runs:

* :mod:`.limits` — upload size, zip-bomb and macro checks before any parser runs;
* :mod:`.reader` — the file as plain grids of values (formulas kept as text, never evaluated);
* :mod:`.mapping` — the header row and what each column holds (guessed, then corrected), one
  circuit per row or two (odd slots in the left half, even slots in the right);
* :mod:`.importer` — rows → circuits through the engine's rules, problems pinned to cells;
* :mod:`.store` — the confirmed circuits written in one transaction (needs the database);
* :mod:`.export` — circuit tables and the summary as XLSX / CSV.

:func:`plan_sheets` and :func:`preview_upload` join the pure pieces for the CLI and the web.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from server.calc.model import Project

from .errors import MappingError, SheetFileError
from .importer import ImportPreview, SheetPlan, build_preview
from .mapping import ColumnMap, guess_mapping, parse_overrides
from .reader import Book, read_upload

__all__ = [
    "Book",
    "ColumnMap",
    "ImportPreview",
    "MappingError",
    "SheetFileError",
    "SheetPlan",
    "plan_sheets",
    "preview_upload",
    "read_upload",
]


def plan_sheets(
    book: Book,
    project: Project,
    *,
    panel: str | None = None,
    sheet: str | None = None,
    mapping: str | Mapping[str, Any] | None = None,
) -> list[SheetPlan]:
    """Which sheets go to which panels.

    * ``panel`` given: one sheet (``sheet``, or the first holding a recognisable table) into that panel;
    * otherwise every sheet named after a panel of the project goes into that panel, and a
      sheet with a Panel column is split by that column (the CSV export's shape).
    """
    if panel is not None:
        if sheet is None and mapping is None and len(book.sheets) > 1:
            # no sheet named: the first one that holds a recognisable table (skips cover sheets)
            for grid in book.sheets:
                try:
                    return [SheetPlan(sheet=grid.name, mapping=guess_mapping(grid), panel=panel)]
                except MappingError:
                    continue
        grid = book.sheet(sheet)
        cmap = guess_mapping(grid) if mapping is None else parse_overrides(mapping, grid)
        return [SheetPlan(sheet=grid.name, mapping=cmap, panel=panel)]
    plans: list[SheetPlan] = []
    candidates = [book.sheet(sheet)] if sheet is not None else list(book.sheets)
    tags = {p.tag.lower(): p.tag for p in project.panels}
    for grid in candidates:
        tag = tags.get(grid.name.strip().lower())
        try:
            cmap = guess_mapping(grid) if mapping is None else parse_overrides(mapping, grid)
        except MappingError:
            if tag is None:
                continue  # a sheet that is not a circuit table (a summary, a cover sheet)
            raise
        if tag is not None:
            plans.append(SheetPlan(sheet=grid.name, mapping=cmap, panel=tag))
        elif cmap.column_role_present("panel") and cmap.column_role_present("slot"):
            plans.append(SheetPlan(sheet=grid.name, mapping=cmap, panel=None))
    if not plans:
        names = ", ".join(repr(g.name) for g in book.sheets)
        raise MappingError(
            f"{book.source}: no sheet is named after a panel of the project and none has a Panel column "
            f"(sheets: {names}); choose the panel"
        )
    return plans


def preview_upload(book: Book, plans: Sequence[SheetPlan], project: Project) -> ImportPreview:
    """Validate the planned sheets against ``project`` and return what would be stored."""
    grids = {g.name: g for g in book.sheets}
    return build_preview(book.source, grids, plans, project)
