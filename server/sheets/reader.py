"""Reading an uploaded XLSX or CSV file into plain grids of cell values.

Nothing here knows about panels: a :class:`Book` is a list of :class:`Grid` (one per sheet),
each a list of rows of plain Python values, plus the cells that held a formula.  XLSX is opened
with ``openpyxl`` in read-only mode, ``data_only=False`` (formulas are read as their text and
never evaluated; cached results are ignored too) and ``keep_vba=False``; the zip is checked by
:mod:`server.sheets.limits` first.  Merged cells need no special case: openpyxl gives the
value to the top-left cell and leaves the rest empty, and the header finder fills group
headers across (see :mod:`server.sheets.mapping`).
"""

from __future__ import annotations

import csv
import io
import zipfile
from dataclasses import dataclass, field
from datetime import date, datetime, time
from pathlib import PurePath
from typing import Any

from .errors import SheetFileError
from .limits import check_size, open_checked_zip

CellValue = str | int | float | bool | None

#: Rows and columns read per sheet.  A panelboard has at most 200 spaces; these bounds are
#: generous for several panels per sheet and stop a runaway sheet from filling memory.
MAX_ROWS = 50_000
MAX_COLUMNS = 200

#: Text that would start a formula when a CSV is opened in a spreadsheet program.  Exports
#: prefix such text with an apostrophe (the OWASP "CSV injection" advice) and import strips it.
FORMULA_STARTS = ("=", "+", "-", "@")


@dataclass(frozen=True)
class Grid:
    """One sheet (or one CSV file) as rows of plain values, 0-based, trailing blanks trimmed."""

    name: str
    rows: tuple[tuple[CellValue, ...], ...]
    formulas: frozenset[tuple[int, int]] = frozenset()  # (row, column) of cells that held a formula
    width: int = 0


@dataclass(frozen=True)
class Book:
    """Every sheet of an uploaded file."""

    source: str
    kind: str  # "xlsx" or "csv"
    sheets: tuple[Grid, ...] = field(default_factory=tuple)

    def sheet(self, name: str | None) -> Grid:
        if name is None:
            return self.sheets[0]
        for g in self.sheets:
            if g.name == name:
                return g
        names = ", ".join(repr(g.name) for g in self.sheets)
        raise SheetFileError(f"has no sheet named {name!r}; its sheets are {names}", source=self.source)


def read_upload(data: bytes, filename: str, *, limit_bytes: int | None = None) -> Book:
    """Read an uploaded file by its extension (.xlsx or .csv); anything else is refused by name."""
    source = PurePath(filename).name or "upload"
    check_size(len(data), source=source, limit_bytes=limit_bytes)
    ext = PurePath(filename).suffix.lower()
    if ext in (".xlsm", ".xltm", ".xlam"):
        raise SheetFileError(
            "is a macro-enabled workbook; macros are refused, never run or kept. Save it as .xlsx and upload again",
            source=source,
        )
    if ext == ".xlsx":
        return read_xlsx(data, source)
    if ext in (".csv", ".txt"):
        return read_csv(data, source)
    if ext in (".xls", ".xlsb", ".ods", ".numbers"):
        raise SheetFileError(f"{ext} files are not read; save the sheet as .xlsx or .csv", source=source)
    raise SheetFileError("is not a spreadsheet: upload an .xlsx workbook or a .csv file", source=source)


def _plain(value: Any) -> CellValue:
    if value is None or isinstance(value, (str, int, float, bool)):
        return value
    if isinstance(value, (datetime, date, time)):
        return value.isoformat()
    return str(value)


def read_xlsx(data: bytes, source: str) -> Book:
    """Read every sheet of an XLSX workbook without evaluating anything."""
    open_checked_zip(data, source=source).close()
    import openpyxl  # imported here so the CLI starts fast
    from openpyxl.utils.exceptions import InvalidFileException

    try:
        wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=False, keep_vba=False, keep_links=False)
    except (zipfile.BadZipFile, InvalidFileException, KeyError, ValueError, TypeError, OSError, EOFError) as exc:
        raise SheetFileError(
            f"is a damaged XLSX workbook and cannot be read ({type(exc).__name__}: {exc})", source=source
        ) from None
    except Exception as exc:  # noqa: BLE001 - any parser failure on a hostile file is a refusal, not a traceback
        raise SheetFileError(f"cannot be read as an XLSX workbook ({type(exc).__name__})", source=source) from None
    try:
        sheets = []
        for ws in wb.worksheets:
            sheets.append(_read_sheet(ws, source))
    except SheetFileError:
        raise
    except (zipfile.BadZipFile, KeyError, ValueError, TypeError, OSError, EOFError) as exc:
        raise SheetFileError(
            f"is a damaged XLSX workbook and cannot be read ({type(exc).__name__}: {exc})", source=source
        ) from None
    except Exception as exc:  # noqa: BLE001 - see above
        raise SheetFileError(f"cannot be read as an XLSX workbook ({type(exc).__name__})", source=source) from None
    finally:
        wb.close()
    if not sheets:
        raise SheetFileError("has no worksheets", source=source)
    return Book(source=source, kind="xlsx", sheets=tuple(sheets))


def _read_sheet(ws: Any, source: str) -> Grid:
    rows: list[tuple[CellValue, ...]] = []
    formulas: set[tuple[int, int]] = set()
    width = 0
    for r, cells in enumerate(ws.iter_rows()):
        if r >= MAX_ROWS:
            raise SheetFileError(
                f"sheet {ws.title!r} has more than {MAX_ROWS} rows; split it or remove unused rows", source=source
            )
        values: list[CellValue] = []
        for c, cell in enumerate(cells[:MAX_COLUMNS]):
            value = cell.value
            if getattr(cell, "data_type", None) == "f" or (
                value is not None and not isinstance(value, (str, int, float, bool, datetime, date, time))
            ):
                # a formula (plain or array): keep its text for display, never evaluate it
                formulas.add((r, c))
                text = getattr(value, "text", value)
                values.append(str(text) if text is not None else "=")
                continue
            values.append(_plain(value))
        while values and (values[-1] is None or values[-1] == ""):
            values.pop()
        width = max(width, len(values))
        rows.append(tuple(values))
    while rows and not rows[-1]:
        rows.pop()
    return Grid(name=ws.title, rows=tuple(rows), formulas=frozenset(formulas), width=width)


def _decode(data: bytes, source: str) -> str:
    if b"\x00" in data[:65536]:
        raise SheetFileError("is not a text CSV file (it holds binary data); upload .xlsx or .csv", source=source)
    for enc in ("utf-8-sig", "cp1252"):
        try:
            return data.decode(enc)
        except UnicodeDecodeError:
            continue
    return data.decode("latin-1")


def read_csv(data: bytes, source: str) -> Book:
    """Read a CSV file (comma, semicolon or tab separated; UTF-8 or Windows-1252)."""
    text = _decode(data, source)
    sample = text[:20000]
    # Only the delimiter is sniffed; quoting stays the standard (RFC 4180 / "excel") so a
    # quote character inside a cell can never be mistaken for a different quoting style.
    try:
        delimiter = csv.Sniffer().sniff(sample, delimiters=",;\t").delimiter
    except csv.Error:
        delimiter = ","
    first_line = sample.split("\n", 1)[0]
    if first_line.count(delimiter) == 0 and first_line.count(",") > 0:
        delimiter = ","
    rows: list[tuple[CellValue, ...]] = []
    width = 0
    try:
        for r, raw in enumerate(csv.reader(io.StringIO(text, newline=""), csv.excel, delimiter=delimiter)):
            if r >= MAX_ROWS:
                raise SheetFileError(f"has more than {MAX_ROWS} rows; split it", source=source)
            values: list[CellValue] = [unescape_text(v.strip()) or None for v in raw[:MAX_COLUMNS]]
            while values and values[-1] is None:
                values.pop()
            width = max(width, len(values))
            rows.append(tuple(values))
    except csv.Error as exc:
        raise SheetFileError(f"is not a well-formed CSV file ({exc})", source=source) from None
    while rows and not rows[-1]:
        rows.pop()
    if not rows:
        raise SheetFileError("has no rows", source=source)
    name = PurePath(source).stem or "sheet"
    return Book(source=source, kind="csv", sheets=(Grid(name=name, rows=tuple(rows), width=width),))


def escape_text(text: str) -> str:
    """Prefix text that a spreadsheet program would run as a formula with an apostrophe (CSV export)."""
    if text.startswith(FORMULA_STARTS) or text.startswith("'"):
        return "'" + text
    return text


def unescape_text(text: str) -> str:
    """Undo :func:`escape_text` (CSV import)."""
    if text.startswith("'") and (text[1:].startswith(FORMULA_STARTS) or text[1:].startswith("'")):
        return text[1:]
    return text
