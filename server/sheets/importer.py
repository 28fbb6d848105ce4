"""Turning a mapped sheet into circuits, with every problem pinned to its row and cell.

Each data row becomes a raw circuit dict in the version-1 project-file shape and goes through
the engine's own rules: :func:`server.calc.projectfile.parse_circuit` for the row,
:func:`~server.calc.projectfile.check_panel` and
:func:`~server.calc.projectfile.check_topology` for the panel and project.  This module only
adds what is particular to spreadsheets: reading slot and breaker notations ("1,3,5",
"1-3-5", "20/1"), converting a kVA or amps column to VA, mapping category words, comparing a
phase column with the slot, and skipping blank, repeated-header and totals rows.

A two-column map (:attr:`~server.sheets.mapping.ColumnMap.split` set) reads each half of a row
as its own circuit through the same path (:func:`_two_column_rows`): a multi-pole breaker whose
further rows are blank, marked or repeat its description becomes one circuit, and a slot
claimed by two halves is refused by row and column.

Nothing is written here: :class:`ImportPreview` is shown to the user, and only
:meth:`ImportPreview.circuits_by_panel` of a preview without errors is handed to the store.
"""

from __future__ import annotations

import functools
import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field, replace
from enum import StrEnum

from server.calc.errors import CalcError, Problem
from server.calc.loads import va_from_amps, va_from_kva
from server.calc.model import Category, Circuit, Panel, Project
from server.calc.projectfile import check_panel, check_topology, parse_circuit
from server.calc.systems import SYSTEMS, SystemSpec, breaker_phases

from .mapping import LOAD_ROLES, ColumnMap, Role, Side, column_letter, normalise, to_number
from .reader import CellValue, Grid


class Severity(StrEnum):
    ERROR = "error"  # blocks the commit
    WARNING = "warning"  # shown; the row is stored as the preview says


@dataclass(frozen=True)
class CellProblem:
    """A problem of one row, pinned to a column when one column is to blame."""

    message: str
    column: int | None = None  # 0-based sheet column; None = the row as a whole
    field: str = ""  # circuit field (slot, poles, va ...)
    severity: Severity = Severity.ERROR


@dataclass(frozen=True)
class PreviewRow:
    """One sheet row as it will be stored (or why it will not be)."""

    sheet: str
    sheet_row: int  # 1-based row number as the spreadsheet program shows it
    values: tuple[CellValue, ...]  # the cells as read (formulas as their text)
    panel: str | None = None
    circuit: Circuit | None = None
    phases: tuple[str, ...] = ()
    problems: tuple[CellProblem, ...] = ()
    ignored: str = ""  # why the row is not imported ("blank row", "totals row" ...)

    width: int = 0
    side: str = ""  # two-column layout: "left" or "right" half of the sheet row; "" = the whole row
    slot_inferred: bool = False  # the slot came from the row order, not from a circuit column

    @property
    def cells(self) -> tuple[str, ...]:
        """The cell texts as read, one per sheet column."""
        return _row_texts(self.values, self.width)

    @property
    def has_error(self) -> bool:
        return any(p.severity == Severity.ERROR for p in self.problems)

    def problems_at(self, column: int) -> tuple[CellProblem, ...]:
        return tuple(p for p in self.problems if p.column == column)

    def row_problems(self) -> tuple[CellProblem, ...]:
        return tuple(p for p in self.problems if p.column is None)


@dataclass(frozen=True)
class SheetPlan:
    """Which sheet goes to which panel, read with which mapping."""

    sheet: str
    mapping: ColumnMap
    panel: str | None = None  # None: the sheet has a Panel column naming each row's panel


@dataclass(frozen=True)
class ImportPreview:
    """The whole import as it would be stored; commit only when :attr:`can_commit`."""

    source: str
    plans: tuple[SheetPlan, ...]
    rows: tuple[PreviewRow, ...]
    circuits: dict[str, tuple[Circuit, ...]] = field(default_factory=dict)  # by panel tag
    problems: tuple[str, ...] = ()  # problems of the import as a whole (no rows, unknown panel ...)
    notes: tuple[str, ...] = ()  # what the import assumed (slots inferred from the row order ...)

    @property
    def error_count(self) -> int:
        return len(self.problems) + sum(1 for r in self.rows for p in r.problems if p.severity == Severity.ERROR)

    @property
    def warning_count(self) -> int:
        return sum(1 for r in self.rows for p in r.problems if p.severity == Severity.WARNING)

    @property
    def can_commit(self) -> bool:
        return self.error_count == 0 and bool(self.circuits)

    def imported_rows(self) -> list[PreviewRow]:
        return [r for r in self.rows if r.circuit is not None]

    def circuits_by_panel(self) -> dict[str, tuple[Circuit, ...]]:
        if not self.can_commit:
            raise ValueError("an import with errors cannot be committed")
        return dict(self.circuits)

    def problem_lines(self, limit: int | None = None) -> list[str]:
        """Every problem as one line naming file, sheet, row, panel, slot and column."""
        lines = [f"{self.source}: {p}" for p in self.problems]
        for r in self.rows:
            for p in r.problems:
                where = [f"{self.source}", f"sheet {r.sheet!r}", f"row {r.sheet_row}"]
                if r.side:
                    where[-1] += f" ({r.side} half)"
                if r.panel:
                    where.append(f"panel {r.panel}")
                if r.circuit is not None:
                    where.append(f"slot {r.circuit.slot}")
                if p.column is not None:
                    where.append(f"column {column_letter(p.column)}")
                if p.field:
                    where.append(p.field)
                lines.append(f"{p.severity.value}: " + ", ".join(where) + f": {p.message}")
        return lines[:limit] if limit else lines


# --------------------------------------------------------------------------- cell readers

_CATEGORY_WORDS: tuple[tuple[str, Category], ...] = (
    (r"^(ltg|lts|light|lighting|lights|lighting general|general lighting|l)$", Category.LIGHTING),
    (r"^(rec|recep|recept|receptacles?|rcpt|outlets?|r|gp receptacles?)$", Category.RECEPTACLE),
    (r"^(mot|mtr|motors?|m|pump|pumps|fan|fans)$", Category.MOTOR),
    (r"^(hvac|ac|a c|cooling|cool|rtu|chiller|condenser|air conditioning|compressor)$", Category.COOLING),
    (r"^(heat|heating|htg|heater|heaters|electric heat|baseboard)$", Category.HEATING),
    (r"^(kit|kitchen|kitchen equipment|cooking|kitchen equip)$", Category.KITCHEN),
    (r"^(ev|evse|ev charging|ev charger|ev chargers|car charger)$", Category.EV_CHARGING),
    (r"^(eq|equip|equipment|misc|miscellaneous|other|process)$", Category.EQUIPMENT),
    (r"^(spare|spares|spr)$", Category.SPARE),
)
_CATEGORY_RE = tuple((re.compile(p), c) for p, c in _CATEGORY_WORDS)

_TOTAL_RE = re.compile(r"\b(total|totals|subtotal|sub total|sum|connected load|demand load|demand|grand)\b")


def _text(v: CellValue) -> str:
    if v is None:
        return ""
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return str(v).strip()


@functools.lru_cache(maxsize=512)
def category_of(text: str) -> Category | None:
    t = normalise(text).replace("_", " ")
    try:
        return Category(t.replace(" ", "_"))
    except ValueError:
        pass
    for pattern, cat in _CATEGORY_RE:
        if pattern.match(t):
            return cat
    return None


def parse_slot(value: CellValue) -> tuple[int, int | None] | str:
    """(slot, poles from the notation or None) or an error message.

    "7" → (7, None); "1,3,5", "1-3-5", "1/3/5" → (1, 3); "2-4" → (2, 2); a range "1-5" → (1, 3).
    """
    if isinstance(value, bool):
        return f"{value!r} is not a slot number"
    if isinstance(value, (int, float)):
        if not math.isfinite(value) or value != int(value):
            return f"{_text(value)!r} is not a whole slot number"
        return int(value), None
    text = str(value).strip()
    numbers = [int(n) for n in re.findall(r"\d+", text)]
    if not numbers or re.search(r"[^\d\s,;/&+\-]", re.sub(r"(?i)^(ckt|cct|slot|no\.?|#)\s*", "", text)):
        return f"{text!r} is not a slot number (write 7, or 1,3,5 for a 3-pole breaker)"
    if len(numbers) == 1:
        return numbers[0], None
    first = numbers[0]
    if all(b - a == 2 for a, b in zip(numbers, numbers[1:], strict=False)) and len(numbers) <= 3:
        return first, len(numbers)
    if len(numbers) == 2 and numbers[1] - first == 4 and "-" in text:
        return first, 3  # a range 1-5 covers 1, 3, 5
    return (
        f"{text!r} is not the slots of one breaker: a breaker of P poles at slot s takes s, s+2, s+4 "
        "(e.g. 1,3,5 or 2-4)"
    )


@functools.lru_cache(maxsize=1024, typed=True)
def parse_breaker(value: CellValue) -> tuple[int | None, int | None] | str:
    """(trip amps, poles) from 20, "20A", "20/1", "20A/2P", "2P-30A"; or an error message."""
    if isinstance(value, bool):
        return f"{value!r} is not a breaker rating"
    if isinstance(value, (int, float)):
        if value != int(value) or value <= 0:
            return f"{_text(value)!r} is not a breaker trip rating in whole amps"
        return int(value), None
    text = str(value).strip().lower()
    tokens = re.findall(r"(\d+(?:\.\d+)?)\s*(amps?|a|poles?|pole|p)?\b", text)
    if not tokens or re.search(r"[^\d\s./\-,xapmoles]", text):
        return f"{str(value)!r} is not a breaker rating (write 20, 20A, or 20/1 for amps/poles)"
    amps: float | None = None
    poles: float | None = None
    bare: list[float] = []
    for number, unit in tokens:
        n = float(number)
        if unit.startswith("p"):
            poles = n
        elif unit.startswith("a"):
            amps = n
        else:
            bare.append(n)
    for n in bare:
        if amps is None and (poles is not None or n > 3 or len(bare) == 1):
            amps = n
        elif poles is None:
            poles = n
        elif amps is None:
            amps = n
    if len(bare) == 2 and amps is not None and poles is not None and amps <= 3 < poles:
        amps, poles = poles, amps  # "1/20": poles/amps written the other way round
    if amps is not None and amps != int(amps):
        return f"{str(value)!r}: breaker trip must be whole amps"
    if poles is not None and (poles != int(poles) or not 1 <= poles <= 3):
        return f"{str(value)!r}: a breaker has 1, 2 or 3 poles"
    return (int(amps) if amps is not None else None), (int(poles) if poles is not None else None)


@functools.lru_cache(maxsize=1024, typed=True)
def parse_poles(value: CellValue) -> int | str:
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        if value == int(value) and 0 <= value <= 3:
            return int(value)
        return f"{_text(value)!r} is not a number of poles (0 for a space, 1, 2 or 3)"
    m = re.fullmatch(r"\s*(\d)\s*(p|pole|poles|-pole|ph)?\s*", str(value).lower())
    if m and int(m.group(1)) <= 3:
        return int(m.group(1))
    return f"{str(value)!r} is not a number of poles (0 for a space, 1, 2 or 3)"


@functools.lru_cache(maxsize=1024, typed=True)
def parse_phases(value: CellValue) -> tuple[str, ...] | None:
    letters = re.sub(r"[^ABC]", "", _text(value).upper())
    if not letters or re.search(r"[^ABC\s,/\-Ø&+]", _text(value).upper().replace("PH", "")):
        return None
    return tuple(sorted(set(letters)))


def amps_to_va(amps: float, poles: int, spec: SystemSpec) -> float | str:
    """Load current to VA from the panel voltage (the engine's :func:`server.calc.loads.va_from_amps`);
    a problem comes back as its message for the preview cell."""
    try:
        return va_from_amps(amps, poles, spec)
    except CalcError as exc:
        return str(exc)


# --------------------------------------------------------------------------- rows


_FIELD_OF_ROLE: dict[Role, str] = {
    Role.SLOT: "slot",
    Role.DESCRIPTION: "description",
    Role.LOAD_VA: "va",
    Role.LOAD_KVA: "va",
    Role.LOAD_AMPS: "va",
    Role.POLES: "poles",
    Role.BREAKER: "breaker_amps",
    Role.CATEGORY: "category",
    Role.NOTES: "notes",
    Role.STATUS: "status",
    Role.PF: "pf",
    Role.CONTINUOUS: "continuous",
    Role.FEEDS: "feeds",
    Role.LOCKED: "locked",
    Role.HARMONIC: "harmonic3_pct",
}
_PASSTHROUGH = (Role.PF, Role.CONTINUOUS, Role.FEEDS, Role.LOCKED, Role.HARMONIC)


_CELL_UNITS: dict[str, Role] = {
    "va": Role.LOAD_VA,
    "w": Role.LOAD_VA,
    "kva": Role.LOAD_KVA,
    "kw": Role.LOAD_KVA,
    "a": Role.LOAD_AMPS,
    "amp": Role.LOAD_AMPS,
    "amps": Role.LOAD_AMPS,
}


def _unit_suffix(text: str) -> str:
    m = re.search(r"([A-Za-z]+)\s*$", text)
    return m.group(1).lower() if m else ""


@dataclass
class _RowWork:
    raw: dict[str, object]
    problems: list[CellProblem]
    columns: dict[str, int]  # circuit field -> column the value came from
    load: tuple[float, Role, int] | None = None  # value, unit role, column
    phase_cell: tuple[tuple[str, ...] | None, int] | None = None


def _column_roles(cmap: ColumnMap) -> list[tuple[int, Role]]:
    return [(i, r) for i, r in enumerate(cmap.roles) if r != Role.IGNORE]


def _read_row(values: Sequence[CellValue], formulas: set[int], cols: list[tuple[int, Role]]) -> _RowWork:
    w = _RowWork(raw={}, problems=[], columns={})
    slot_poles: int | None = None
    breaker_poles: int | None = None
    poles_col: int | None = None
    for c, role in cols:
        v = values[c] if c < len(values) else None
        if c in formulas:
            w.problems.append(
                CellProblem(
                    f"holds a formula ({_text(v)[:60]}); formulas are never evaluated: type the value",
                    c,
                    _FIELD_OF_ROLE.get(role, role.value),
                )
            )
            continue
        if v is None or v == "":
            continue
        if role == Role.SLOT:
            got = parse_slot(v)
            if isinstance(got, str):
                w.problems.append(CellProblem(got, c, "slot"))
            else:
                w.raw["slot"], slot_poles = got
            w.columns["slot"] = c
        elif role == Role.POLES:
            p = parse_poles(v)
            if isinstance(p, str):
                w.problems.append(CellProblem(p, c, "poles"))
            else:
                w.raw["poles"], poles_col = p, c
        elif role == Role.BREAKER:
            got_b = parse_breaker(v)
            if isinstance(got_b, str):
                w.problems.append(CellProblem(got_b, c, "breaker_amps"))
            else:
                amps, breaker_poles = got_b
                if amps is not None:
                    w.raw["breaker_amps"] = amps
            w.columns["breaker_amps"] = c
        elif role in LOAD_ROLES:
            n = to_number(v)
            if n is None:
                w.problems.append(CellProblem(f"{_text(v)!r} is not a number", c, "va"))
            else:
                # a unit typed in the cell ("1.2 kVA", "850 VA", "12 A") wins over the column's
                w.load = (n, _CELL_UNITS.get(_unit_suffix(v), role) if isinstance(v, str) else role, c)
            w.columns["va"] = c
        elif role == Role.PHASE:
            w.phase_cell = (parse_phases(v), c)
        elif role == Role.DESCRIPTION:
            w.raw["description"] = _text(v)
            w.columns["description"] = c
        elif role == Role.NOTES:
            w.raw["notes"] = _text(v)
            w.columns["notes"] = c
        elif role == Role.CATEGORY:
            text = _text(v)
            cat = category_of(text)
            if cat is None:
                w.problems.append(
                    CellProblem(f"unknown category {text!r}; stored as 'equipment'", c, "category", Severity.WARNING)
                )
                cat = Category.EQUIPMENT
            w.raw["category"] = cat.value
            w.columns["category"] = c
        elif role == Role.STATUS:
            w.raw["status"] = normalise(_text(v))
            w.columns["status"] = c
        elif role in _PASSTHROUGH:
            fieldname = _FIELD_OF_ROLE[role]
            w.raw[fieldname] = v if not isinstance(v, str) else v.strip()
            w.columns[fieldname] = c
    # poles: a Poles column wins; otherwise the breaker notation, otherwise the slot notation
    given = [
        (p, col, what)
        for p, col, what in (
            (w.raw.get("poles"), poles_col, "the poles column"),
            (breaker_poles, w.columns.get("breaker_amps"), "the breaker notation"),
            (slot_poles, w.columns.get("slot"), "the slot notation"),
        )
        if p is not None
    ]
    if given:
        poles, col, what = given[0]
        w.raw["poles"] = poles
        w.columns["poles"] = col if col is not None else -1
        for other, ocol, owhat in given[1:]:
            if other != poles:
                w.problems.append(CellProblem(f"{owhat} says {other} poles but {what} says {poles}", ocol, "poles"))
    return w


def _is_blank(values: Sequence[CellValue]) -> bool:
    return all(v is None or (isinstance(v, str) and not v.strip()) for v in values)


def _row_texts(values: Sequence[CellValue], width: int) -> tuple[str, ...]:
    return tuple(_text(values[c]) if c < len(values) else "" for c in range(width))


def build_preview(
    source: str,
    grids: dict[str, Grid],
    plans: Sequence[SheetPlan],
    project: Project,
) -> ImportPreview:
    """Read every planned sheet, validate through the engine, and return what would be stored."""
    top: list[str] = []
    notes: list[str] = []
    rows: list[PreviewRow] = []
    by_panel: dict[str, list[tuple[int, Circuit]]] = {}
    claimed: dict[str, str] = {}
    for plan in plans:
        grid = grids[plan.sheet]
        if plan.panel is not None:
            if project.panel(plan.panel) is None:
                top.append(f"panel {plan.panel!r} is not in project {project.project.number or project.project.name}")
                continue
            if plan.panel in claimed:
                top.append(
                    f"panel {plan.panel} is imported from two sheets ({claimed[plan.panel]!r} and {plan.sheet!r})"
                )
                continue
            claimed[plan.panel] = plan.sheet
        elif plan.mapping.column(Role.PANEL) is None:
            top.append(f"sheet {plan.sheet!r}: choose a panel, or map a column to 'panel'")
            continue
        if plan.mapping.split is not None:
            two = _two_column_rows(grid, plan, project, by_panel, len(rows))
            rows.extend(two.rows)
            notes.extend(two.notes)
            continue
        if plan.mapping.column(Role.SLOT) is None:
            top.append(f"sheet {plan.sheet!r}: no column is mapped to 'slot'; every circuit needs its slot number")
            continue
        rows.extend(_sheet_rows(grid, plan, project, by_panel, len(rows)))
    # Engine checks per panel and for the project, on the panels as they would be stored.
    new_panels: dict[str, Panel] = {}
    for tag, items in by_panel.items():
        panel = project.panel(tag)
        assert panel is not None  # rows for unknown panels never reach by_panel
        circuits = tuple(sorted((c for _, c in items), key=lambda c: c.slot))
        new_panels[tag] = replace(panel, circuits=circuits)
    if new_panels:
        _attach_engine_problems(project, new_panels, by_panel, rows, plans)
    if not rows and not top:
        top.append("no circuit rows were found below the header row")
    elif not by_panel and not top:
        top.append("no row holds a circuit (every row is blank, a header, a total or an empty slot)")
    circuits = {tag: p.circuits for tag, p in new_panels.items()}
    return ImportPreview(
        source=source, plans=tuple(plans), rows=tuple(rows), circuits=circuits, problems=tuple(top), notes=tuple(notes)
    )


def _sheet_rows(
    grid: Grid,
    plan: SheetPlan,
    project: Project,
    by_panel: dict[str, list[tuple[int, Circuit]]],
    offset: int,
) -> Iterable[PreviewRow]:
    cmap = plan.mapping
    cols = _column_roles(cmap)
    slot_col = cmap.column(Role.SLOT)
    panel_col = cmap.column(Role.PANEL)
    width = max(grid.width, len(cmap.roles))
    header_key = tuple(normalise(h) for h in cmap.headers)
    formulas_by_row: dict[int, set[int]] = {}
    for r, c in grid.formulas:
        formulas_by_row.setdefault(r, set()).add(c)
    ended: str = ""
    out: list[PreviewRow] = []
    panels = {p.tag: p for p in project.panels}
    for r in range(cmap.header_row + 1, len(grid.rows)):
        values = grid.rows[r]

        def row_of(**kw: object) -> PreviewRow:
            return PreviewRow(sheet=plan.sheet, sheet_row=r + 1, values=values, width=width, **kw)  # noqa: B023

        if ended:
            if not _is_blank(values):
                out.append(row_of(ignored=ended))
            continue
        if _is_blank(values):
            continue  # blank rows are layout, not data
        key_col = slot_col if slot_col is not None else 0
        key_value = values[key_col] if key_col < len(values) else None
        if (
            isinstance(key_value, str)
            and normalise(key_value) == header_key[key_col]
            and all(normalise(t) == h for t, h in zip(_row_texts(values, width), header_key, strict=False))
        ):
            out.append(row_of(ignored="repeated header row"))
            continue
        slot_value = values[slot_col] if slot_col is not None and slot_col < len(values) else None
        if slot_value is None or slot_value == "":
            joined = normalise(" ".join(_row_texts(values, width)))
            if _TOTAL_RE.search(joined):
                ended = "below the totals row"
                out.append(row_of(ignored="totals row (not a circuit)"))
                continue
        w = _read_row(values, formulas_by_row.get(r, set()), cols)
        # the panel of the row
        tag = plan.panel
        if tag is None and panel_col is not None:
            tag = _text(values[panel_col]) if panel_col < len(values) else ""
            if not tag:
                w.problems.append(CellProblem("no panel tag", panel_col, "panel"))
            elif tag not in panels:
                w.problems.append(CellProblem(f"panel {tag!r} is not in this project", panel_col, "panel"))
                tag = None
        if "slot" not in w.raw:
            if not any(k in w.raw for k in ("description", "breaker_amps", "category")) and w.load is None:
                out.append(row_of(panel=tag, ignored="no slot and no circuit data", problems=tuple(w.problems)))
            else:
                w.problems.append(CellProblem("no slot number; every circuit needs one", slot_col, "slot"))
                out.append(row_of(panel=tag, problems=tuple(w.problems)))
            continue
        described = any(k in w.raw for k in ("description", "breaker_amps", "category", "poles", "feeds"))
        if not described and w.load is None and not w.problems:
            out.append(row_of(panel=tag, ignored="empty slot"))
            continue
        panel = panels.get(tag) if tag else None
        circuit, phases = _make_circuit(w, tag, panel, cmap, offset + len(out))
        row = row_of(panel=tag, circuit=circuit, phases=phases, problems=tuple(w.problems))
        if circuit is not None and tag is not None and panel is not None:
            by_panel.setdefault(tag, []).append((offset + len(out), circuit))
        out.append(row)
    return out


def _make_circuit(
    w: _RowWork, tag: str | None, panel: Panel | None, cmap: ColumnMap, index: int, *, row_phase: bool = False
) -> tuple[Circuit | None, tuple[str, ...]]:
    """The circuit of one read row through the engine's :func:`parse_circuit`; problems go to ``w``.

    ``row_phase``: the phase column names the phase of the row (the middle column of a two-column
    schedule), so one letter matching the breaker's first slot agrees too.
    """
    desc = str(w.raw.get("description", ""))
    word = desc.strip().lower() if len(desc) <= 8 else ""
    if word in ("space", "spc") and "poles" not in w.raw:
        w.raw["poles"] = 0
    # messy sheets without a category column: a breaker described "spare" is a spare
    if word in ("spare", "spr") and cmap.column(Role.CATEGORY) is None:
        w.raw["category"] = Category.SPARE.value
    spec = SYSTEMS.get(panel.system) if panel else None
    poles_for_load = int(w.raw.get("poles", 1) or 1)
    if w.load is not None:
        value, unit, col = w.load
        if unit == Role.LOAD_KVA:
            w.raw["va"] = round(va_from_kva(value), 6)
        elif unit == Role.LOAD_AMPS:
            if spec is not None:
                va = amps_to_va(value, poles_for_load, spec)
                if isinstance(va, str):
                    w.problems.append(CellProblem(va, col, "va"))
                else:
                    w.raw["va"] = round(va, 3)
        else:
            w.raw["va"] = value
    engine: list[Problem] = []
    circuit = parse_circuit(w.raw, engine, tag=tag or "?", index=index)
    for p in engine:
        col = w.columns.get(p.field or "")
        w.problems.append(CellProblem(p.message, col if col is not None and col >= 0 else None, p.field or ""))
    phases: tuple[str, ...] = ()
    if circuit is not None and spec is not None and not circuit.is_space and circuit.poles <= len(spec.phases):
        phases = breaker_phases(spec, circuit.slot, circuit.poles)
        if w.phase_cell is not None:
            said, col = w.phase_cell
            if said is None:
                w.problems.append(
                    CellProblem("the phase column is not A, B, C or a mix of them", col, "phase", Severity.WARNING)
                )
            elif said != tuple(sorted(set(phases))) and not (row_phase and said == phases[:1]):
                w.problems.append(
                    CellProblem(
                        f"the phase column says {''.join(said)}, but slot {circuit.slot} "
                        f"({circuit.poles}-pole) is on {''.join(phases)} on {spec.name}; the slot decides",
                        col,
                        "phase",
                        Severity.WARNING,
                    )
                )
    return circuit, phases


def _attach_engine_problems(
    project: Project,
    new_panels: dict[str, Panel],
    by_panel: dict[str, list[tuple[int, Circuit]]],
    rows: list[PreviewRow],
    plans: Sequence[SheetPlan],
) -> None:
    """Run the engine's panel and project checks; pin each new problem to the rows of its slot."""
    found: list[Problem] = []
    for panel in new_panels.values():
        check_panel(panel, found)
    before: list[Problem] = []
    check_topology(project, before)
    after_project = replace(project, panels=tuple(new_panels.get(p.tag, p) for p in project.panels))
    after: list[Problem] = []
    check_topology(after_project, after)
    known = {p.describe() for p in before}
    found.extend(p for p in after if p.describe() not in known)
    slot_rows: dict[tuple[str, int], list[int]] = {}
    for tag, items in by_panel.items():
        for index, c in items:
            slot_rows.setdefault((tag, c.slot), []).append(index)
    maps = {plan.sheet: plan.mapping for plan in plans}
    for p in found:
        targets = slot_rows.get((p.tag or "", p.slot), []) if p.slot is not None else []
        if not targets and p.tag in by_panel:
            # a panel-wide problem: pin it to the panel's first row so it is seen beside the data
            targets = [by_panel[p.tag][0][0]]
        for index in targets[-1:] if "overlap" in p.message else targets:
            row = rows[index]
            cmap = maps[row.sheet]
            col = field_column(cmap.side_map(Side(row.side)) if row.side else cmap, p.field or "")
            rows[index] = replace(row, problems=row.problems + (CellProblem(p.message, col, p.field or ""),))


def field_column(cmap: ColumnMap, fieldname: str) -> int | None:
    """The column a circuit field is read from (poles may come from the breaker or slot notation)."""
    order = [r for r, f in _FIELD_OF_ROLE.items() if f == fieldname]
    if fieldname == "poles":
        order += [Role.BREAKER, Role.SLOT]
    for role in order:
        col = cmap.column(role)
        if col is not None:
            return col
    return None


# --------------------------------------------------------------------------- two-column layout

#: What a continuation row of a multi-pole breaker holds in place of values: dashes, a slash,
#: ditto marks, "do", or the pole count ("2P", "3-pole").  Common practice on hand-made schedules.
_MARK_RE = re.compile(
    r"^(?:[-\u2010-\u2015/\\\"'\u3003\u2033.\u2026 ]+|do|ditto|same|(?P<poles>[23]) ?-? ?(?:p|pole|poles))$", re.I
)


_NUMBER_ROLES = LOAD_ROLES | {Role.POLES, Role.BREAKER, Role.PF, Role.HARMONIC}


def _mark(value: CellValue) -> tuple[bool, int | None]:
    """Whether a cell is a continuation mark, and the pole count it states ("3P" → 3)."""
    if not isinstance(value, str) or len(value) > 12:
        return False, None  # marks are short; most text cells are descriptions
    m = _MARK_RE.match(value.strip())
    if not m:
        return False, None
    return True, int(m.group("poles")) if m.group("poles") else None


@dataclass
class _Half:
    """One half (left or right) of a physical sheet row that holds something."""

    r: int  # 0-based sheet row
    side: Side
    values: tuple[CellValue, ...]
    w: _RowWork
    slot: int | None  # given or inferred; None when the circuit column is blank
    inferred: bool
    conts: list[_Half] = field(default_factory=list)  # continuation rows of a multi-pole breaker
    mark_poles: int | None = None
    owner: _Half | None = None  # set on a continuation half


@dataclass
class _TwoColumnRows:
    rows: list[PreviewRow]
    notes: list[str]


def _stated_poles(h: _Half) -> int | None:
    p = h.w.raw.get("poles")
    return p if isinstance(p, int) else None


def _continues(owner: _Half, content: dict[int, CellValue], roles: Sequence[Role]) -> tuple[bool, int | None]:
    """Whether a half's cells continue ``owner`` (a multi-pole breaker on the rows above).

    With the poles stated on the first row, every cell must be blank, a mark, the first row's
    value again, or a load (one pole's share).  Without them, a mark or the description
    repeated (with no load of its own) extends the breaker, up to 3 poles.
    """
    stated = _stated_poles(owner)
    taken = 1 + len(owner.conts)
    if stated is not None and (stated < 2 or taken >= stated):
        return False, None
    if stated is None and taken >= 3:
        return False, None
    if owner.w.raw.get("poles") == 0 or str(owner.w.raw.get("description", "")).strip().lower() in ("space", "spc"):
        return False, None
    marks = 0
    loads = 0
    repeated_description = False
    mark_poles: int | None = None
    for c, v in content.items():
        is_mark, p = _mark(v)
        if is_mark:
            marks += 1
            mark_poles = p or mark_poles
            continue
        if roles[c] in LOAD_ROLES and to_number(v) is not None:
            loads += 1
            continue
        first = owner.values[c] if c < len(owner.values) else None
        if first not in (None, "") and normalise(_text(v)) == normalise(_text(first)):
            repeated_description |= roles[c] == Role.DESCRIPTION
            continue
        return False, None
    if stated is not None:
        return True, mark_poles
    if marks or (repeated_description and not loads) or (not content and mark_poles):
        return True, mark_poles
    return False, None


def _two_column_rows(
    grid: Grid,
    plan: SheetPlan,
    project: Project,
    by_panel: dict[str, list[tuple[int, Circuit]]],
    offset: int,
) -> _TwoColumnRows:
    """Rows of a two-column schedule: each sheet row gives up to two circuits (left half odd, right half even).

    A multi-pole breaker whose continuation rows are blank, marked ("—", "/", "2P") or repeat
    the description becomes one circuit with its poles; loads on its rows are summed.  Slots come
    from each half's circuit column; a half without one sits beside the other half's slot, or
    takes its place in the row order.
    """
    cmap = plan.mapping
    sides = (Side.LEFT, Side.RIGHT)
    maps = {s: cmap.side_map(s) for s in sides}
    cols = {s: _column_roles(maps[s]) for s in sides}
    own = {
        s: [c for c, r in cols[s] if c in cmap.block(s) and r not in (Role.SLOT, Role.PHASE, Role.PANEL)] for s in sides
    }
    slot_cols = {s: maps[s].column(Role.SLOT) for s in sides}
    inferring = {s for s in sides if slot_cols[s] is None}
    breaker_cols = [c for c, r in enumerate(cmap.roles) if r in (Role.BREAKER, Role.POLES)]
    panel_col = cmap.column(Role.PANEL)
    width = max(grid.width, len(cmap.roles))
    header_key = tuple(normalise(h) for h in cmap.headers)
    # a repeated header row is looked for only where its first heading cell repeats
    key_col = next((i for i, h in enumerate(header_key) if h), 0)
    formulas_by_row: dict[int, set[int]] = {}
    for r, c in grid.formulas:
        formulas_by_row.setdefault(r, set()).add(c)
    panels = {p.tag: p for p in project.panels}
    roles = cmap.roles

    events: list[PreviewRow | _Half] = []
    open_: dict[Side, _Half | None] = {Side.LEFT: None, Side.RIGHT: None}
    ended = ""
    position = 0  # table rows so far (for inferred slots)
    started = False
    for r in range(cmap.header_row + 1, len(grid.rows)):
        values = grid.rows[r]
        blank = _is_blank(values)
        if ended:
            if not blank:
                events.append(_ignored_row(plan, r, values, width, ended))
            continue
        if blank and (not inferring or not started):
            continue  # layout; with slots from the row order, a blank row inside the table is a table row
        if not blank:
            first = values[key_col] if key_col < len(values) else None
            if (
                isinstance(first, str)
                and key_col < len(header_key)
                and normalise(first) == header_key[key_col]
                and all(normalise(t) == h for t, h in zip(_row_texts(values, width), header_key, strict=False))
            ):
                events.append(_ignored_row(plan, r, values, width, "repeated header row"))
                continue
            slot_cells = [values[c] for c in slot_cols.values() if c is not None and c < len(values)]
            if inferring:
                # without circuit numbers to tell them apart, a totals row also has no breaker of its own
                # (a load called "Demand meter" with its trip stays a circuit)
                slot_cells += [values[c] for c in breaker_cols if c < len(values)]
            if all(v is None or v == "" for v in slot_cells) and _TOTAL_RE.search(
                normalise(" ".join(_row_texts(values, width)))
            ):
                ended = "below the totals row"
                events.append(_ignored_row(plan, r, values, width, "totals row (not a circuit)"))
                continue
        started = True
        position += 1
        formulas = formulas_by_row.get(r, set())
        given = {side: _given_slot(values, slot_cols[side]) for side in sides}
        for side in sides:
            content = {
                c: v
                for c in own[side]
                if c < len(values) and (v := values[c]) is not None and not (isinstance(v, str) and not v.strip())
            }
            marked = {c for c, v in content.items() if _mark(v)[0]}
            # a mark in a number column reads as blank ("—" for no load); "2P" in a poles or trip column
            # is kept; a text column keeps it unless the half continues a breaker (read below)
            read_values = values
            numeric = {c for c in marked if roles[c] in _NUMBER_ROLES and not _mark(values[c])[1]}
            if numeric:
                read_values = tuple(None if c in numeric else v for c, v in enumerate(values))
            slot_col = slot_cols[side]
            slot, slot_error = given[side]
            if slot_col is None:
                other = given[Side.RIGHT if side == Side.LEFT else Side.LEFT][0]
                if other is not None:
                    slot = other - 1 if side == Side.LEFT else other + 1  # beside the other half's slot
                else:
                    slot = 2 * (position - 1) + (1 if side == Side.LEFT else 2)
            owner = open_[side]
            if owner is not None and not slot_error:
                expected = owner.slot + 2 * (1 + len(owner.conts)) if owner.slot is not None else None
                if slot is None or expected is None or slot == expected:
                    ok, mark_poles = _continues(owner, content, roles)
                    if ok:
                        cleared = tuple(None if c in marked else v for c, v in enumerate(values))
                        w = _read_row(cleared, formulas, cols[side])
                        cont = _Half(r, side, values, w, slot, False, owner=owner)
                        owner.conts.append(cont)
                        owner.mark_poles = owner.mark_poles or mark_poles
                        events.append(cont)
                        continue
            open_[side] = None
            if len(marked) == len(content):
                continue  # a blank half (only its circuit number, or marks): no circuit
            w = _read_row(read_values, formulas, cols[side])
            h = _Half(r, side, values, w, slot, slot_col is None)
            events.append(h)
            open_[side] = h

    # Second pass: each breaker with its continuation rows becomes one circuit.
    out: list[PreviewRow] = []
    claimed: dict[tuple[str, int], _Half] = {}
    notes: list[str] = []
    for ev in events:
        if isinstance(ev, PreviewRow):
            out.append(ev)
            continue
        if ev.owner is not None:
            own_slot = ev.owner.w.raw.get("slot")
            what = f"slot {own_slot}" if own_slot is not None else "the breaker"
            out.append(
                PreviewRow(
                    sheet=plan.sheet,
                    sheet_row=ev.r + 1,
                    values=ev.values,
                    width=width,
                    side=ev.side.value,
                    ignored=f"continues the breaker at {what} ({ev.owner.side.value} half of row {ev.owner.r + 1})",
                    problems=tuple(p for p in ev.w.problems if p.severity == Severity.ERROR),
                )
            )
            continue
        row, circuit, tag, twice = _half_row(
            ev, plan, panels, maps[ev.side], panel_col, width, claimed, offset + len(out)
        )
        # a slot claimed twice stays out of the panel: its own message says more than an overlap would
        if circuit is not None and tag is not None and tag in panels and not twice:
            by_panel.setdefault(tag, []).append((offset + len(out), circuit))
        out.append(row)
    if len(inferring) == 2:
        notes.append(
            f"sheet {plan.sheet!r}: no circuit-number column on the left and right halves; slots are inferred from "
            "the row order (the n-th table row holds slot 2n-1 on the left and 2n on the right; blank rows inside "
            "the table count as rows). Map a 'slot' column if the sheet has one."
        )
    elif inferring:
        (half,) = inferring
        notes.append(
            f"sheet {plan.sheet!r}: no circuit-number column on the {half.value} half; its slots are inferred beside "
            f"the other half's (one more on the right, one less on the left), or from the row order where that is "
            "blank. Map a 'slot' column if the sheet has one."
        )
    return _TwoColumnRows(out, notes)


def _given_slot(values: tuple[CellValue, ...], slot_col: int | None) -> tuple[int | None, str]:
    """The slot a half's circuit column gives (None when blank or a mark), or why it cannot be read."""
    cell = values[slot_col] if slot_col is not None and slot_col < len(values) else None
    if cell in (None, "") or _mark(cell)[0]:
        return None, ""
    got = parse_slot(cell)
    return (None, got) if isinstance(got, str) else (got[0], "")


def _ignored_row(plan: SheetPlan, r: int, values: tuple[CellValue, ...], width: int, why: str) -> PreviewRow:
    return PreviewRow(sheet=plan.sheet, sheet_row=r + 1, values=values, width=width, ignored=why)


def _half_row(
    h: _Half,
    plan: SheetPlan,
    panels: dict[str, Panel],
    cmap: ColumnMap,
    panel_col: int | None,
    width: int,
    claimed: dict[tuple[str, int], _Half],
    index: int,
) -> tuple[PreviewRow, Circuit | None, str | None, bool]:
    """The preview row of one half (with its continuation rows merged); True when its slot is taken."""
    w = h.w
    tag = plan.panel
    if tag is None and panel_col is not None:
        tag = _text(h.values[panel_col]) if panel_col < len(h.values) else ""
        if not tag:
            w.problems.append(CellProblem("no panel tag", panel_col, "panel"))
        elif tag not in panels:
            w.problems.append(CellProblem(f"panel {tag!r} is not in this project", panel_col, "panel"))
            tag = None

    def row(**kw: object) -> PreviewRow:
        return PreviewRow(
            sheet=plan.sheet,
            sheet_row=h.r + 1,
            values=h.values,
            width=width,
            panel=tag,
            side=h.side.value,
            slot_inferred=h.inferred,
            problems=tuple(w.problems),
            **kw,  # type: ignore[arg-type]
        )

    slot_col = cmap.column(Role.SLOT)
    if "slot" not in w.raw:
        if h.slot is None:
            if not any(p.field == "slot" for p in w.problems):
                w.problems.append(CellProblem(f"no slot number in the {h.side.value} half", slot_col, "slot"))
            return row(), None, tag, False
        w.raw["slot"] = h.slot
    if h.conts:
        _merge_continuations(h)
    circuit, phases = _make_circuit(w, tag, panels.get(tag) if tag else None, cmap, index, row_phase=True)
    twice = False
    if circuit is not None:
        odd = circuit.slot % 2 == 1
        if odd != (h.side == Side.LEFT) and not h.inferred:
            w.problems.append(
                CellProblem(
                    f"slot {circuit.slot} is in the {h.side.value} half, but the {h.side.value} half holds "
                    f"{'odd' if h.side == Side.LEFT else 'even'} slots (odd left, even right); check the circuit "
                    "column or the layout",
                    slot_col,
                    "slot",
                    Severity.WARNING,
                )
            )
        if tag is not None:
            first = claimed.get((tag, circuit.slot))
            if first is not None:
                first_col = _slot_column_of(first, plan.mapping)
                here = f"column {column_letter(slot_col)}" if slot_col is not None else "inferred from the row order"
                there = f"column {column_letter(first_col)}" if first_col is not None else "inferred from the row order"
                w.problems.append(
                    CellProblem(
                        f"slot {circuit.slot} is claimed twice: by the {first.side.value} half of row {first.r + 1} "
                        f"({there}) and by the {h.side.value} half of row {h.r + 1} ({here})",
                        slot_col,
                        "slot",
                    )
                )
                twice = True
            else:
                claimed[(tag, circuit.slot)] = h
    return row(circuit=circuit, phases=phases), circuit, tag, twice


def _slot_column_of(h: _Half, cmap: ColumnMap) -> int | None:
    return cmap.side_map(h.side).column(Role.SLOT)


def _merge_continuations(h: _Half) -> None:
    """Poles and load of a breaker from its continuation rows (before the engine reads the circuit)."""
    w = h.w
    poles = 1 + len(h.conts)
    if "poles" not in w.raw:
        w.raw["poles"] = h.mark_poles or poles
        w.columns.setdefault("poles", -1)
    loads = [(x.r, x.w.load) for x in [h, *h.conts] if x.w.load is not None]
    if len(loads) < 2 and not (loads and w.load is None):
        return
    units = {load[1] for _, load in loads}
    col = loads[0][1][2]
    if Role.LOAD_AMPS in units:
        # line current of a multi-pole load: the same on every row; the first row's is used
        if w.load is None:
            w.load = loads[0][1]
        if len({load[0] for _, load in loads}) > 1:
            w.problems.append(
                CellProblem(
                    "the rows of this breaker give different currents; the first row's is used",
                    col,
                    "va",
                    Severity.WARNING,
                )
            )
        return
    total = sum(va_from_kva(v) if unit == Role.LOAD_KVA else v for _, (v, unit, _c) in loads)
    w.load = (total, Role.LOAD_VA, col)
    if len(loads) > 1:
        rows = ", ".join(str(r + 1) for r, _ in loads)
        w.problems.append(
            CellProblem(
                f"load {total:,.0f} VA is the sum of the breaker's rows {rows} (each row holds one pole's share)",
                col,
                "va",
                Severity.WARNING,
            )
        )
