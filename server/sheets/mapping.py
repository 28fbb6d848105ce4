"""Finding the header row of a sheet and guessing what each column holds.

A :class:`ColumnMap` says, for each column, which :class:`Role` it plays (slot, description,
a load in VA / kVA / amps, poles, breaker trip, phase, category, notes ...).  The guess reads
the header text; a header band of two rows (a merged group label such as "BREAKER" over
"TRIP" and "POLES") is read as one.  The user corrects the guess in the browser, or the CLI
takes corrections as JSON (:func:`parse_overrides`).  Nothing here validates circuits.
"""

from __future__ import annotations

import json
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from enum import StrEnum
from typing import Any

from .errors import MappingError
from .reader import CellValue, Grid

#: Rows searched for a header (titles and project blocks often sit above it).
HEADER_SEARCH_ROWS = 40


class Role(StrEnum):
    """What a column holds.  Values are the names used in mapping JSON and the mapping form."""

    IGNORE = "ignore"
    SLOT = "slot"
    DESCRIPTION = "description"
    LOAD_VA = "va"
    LOAD_KVA = "kva"
    LOAD_AMPS = "amps"
    POLES = "poles"
    BREAKER = "breaker"  # trip amps, or "20/1" (amps/poles)
    PHASE = "phase"
    CATEGORY = "category"
    NOTES = "notes"
    STATUS = "status"
    PF = "pf"
    CONTINUOUS = "continuous"
    FEEDS = "feeds"
    LOCKED = "locked"
    HARMONIC = "harmonic3_pct"
    PANEL = "panel"

    @property
    def label(self) -> str:
        return ROLE_LABELS[self]


ROLE_LABELS: dict[Role, str] = {
    Role.IGNORE: "(not imported)",
    Role.SLOT: "Slot / circuit no.",
    Role.DESCRIPTION: "Description",
    Role.LOAD_VA: "Load (VA)",
    Role.LOAD_KVA: "Load (kVA)",
    Role.LOAD_AMPS: "Load (A), converted to VA",
    Role.POLES: "Poles",
    Role.BREAKER: "Breaker trip (A) or A/poles",
    Role.PHASE: "Phase (checked against the slot)",
    Role.CATEGORY: "Category",
    Role.NOTES: "Notes",
    Role.STATUS: "Status",
    Role.PF: "Power factor",
    Role.CONTINUOUS: "Continuous (yes/no)",
    Role.FEEDS: "Feeds (downstream tag)",
    Role.LOCKED: "Locked (yes/no)",
    Role.HARMONIC: "3rd harmonic (%)",
    Role.PANEL: "Panel tag (one table, several panels)",
}

LOAD_ROLES = frozenset({Role.LOAD_VA, Role.LOAD_KVA, Role.LOAD_AMPS})

_AMBIGUOUS_AMPS = "ambiguous-amps"

# Ordered: the first pattern that matches the normalised header text decides.
_RULES: tuple[tuple[str, Role | str], ...] = (
    (r"^(panel|panel tag|panelboard)$", Role.PANEL),
    (r"harmonic|\bthd\b", Role.HARMONIC),
    (r"\bk ?va\b|\bkw\b", Role.LOAD_KVA),
    (r"\bva\b|\bwatts?\b|\bvolt ?amps?\b|^w$", Role.LOAD_VA),
    (r"power factor|^pf$", Role.PF),
    (r"\bpoles?\b|^p$", Role.POLES),
    (r"\b(trip|breaker|brkr|bkr|cb|ocpd|ocp|at)\b", Role.BREAKER),
    (r"load (amps?|a|current)|\bcurrent\b|\bfla\b|amps? load|^i$", Role.LOAD_AMPS),
    (r"^(amps?|a|amperes?)$", _AMBIGUOUS_AMPS),
    (r"\bphases?\b|^ph$|^leg$", Role.PHASE),
    (r"categor|load type|^type$|\bclass\b|^cat$|^use$", Role.CATEGORY),
    (r"\bnotes?\b|remarks?|comments?", Role.NOTES),
    (r"status|^existing", Role.STATUS),
    (r"continuous|^cont$", Role.CONTINUOUS),
    (r"^feeds\b", Role.FEEDS),
    (r"^locked$", Role.LOCKED),
    (r"desc|\bname\b|serv|designation|^load$|^loads$|equipment|^item$", Role.DESCRIPTION),
    (r"\b(ckt|cct|circ|circuit|slot|position|pos|no|number)\b|^ckt|^cct", Role.SLOT),
)
_COMPILED = tuple((re.compile(p), role) for p, role in _RULES)


def normalise(text: str) -> str:
    """Lower-case header text with punctuation turned into spaces ("Ckt #" → "ckt no")."""
    t = text.lower().replace("#", " no ").replace("\n", " ")
    t = re.sub(r"[^a-z0-9 ]+", " ", t)
    return re.sub(r"\s+", " ", t).strip()


def guess_role(header: str) -> Role | str | None:
    t = normalise(header)
    if not t:
        return None
    for pattern, role in _COMPILED:
        if pattern.search(t):
            return role
    return None


@dataclass(frozen=True)
class ColumnMap:
    """Where the header is and what each column holds."""

    header_row: int  # 0-based index of the last header row; data starts below it
    roles: tuple[Role, ...]  # one per column
    headers: tuple[str, ...]  # the header text shown to the user (group + sub-header)

    def column(self, role: Role) -> int | None:
        for i, r in enumerate(self.roles):
            if r == role:
                return i
        return None

    def column_role_present(self, role: str) -> bool:
        return any(r.value == role for r in self.roles)

    def load_column(self) -> tuple[int, Role] | None:
        for i, r in enumerate(self.roles):
            if r in LOAD_ROLES:
                return i, r
        return None

    def with_role(self, column: int, role: Role) -> ColumnMap:
        """A copy with ``column`` set to ``role``; another column holding the same role gives it up."""
        roles = list(self.roles)
        while len(roles) <= column:
            roles.append(Role.IGNORE)
        if role != Role.IGNORE:
            clash = {role} | (LOAD_ROLES if role in LOAD_ROLES else set())
            roles = [Role.IGNORE if r in clash else r for r in roles]
        roles[column] = role
        return replace(self, roles=tuple(roles))

    def to_json(self) -> dict[str, Any]:
        return {
            "header_row": self.header_row + 1,
            "columns": {column_letter(i): r.value for i, r in enumerate(self.roles) if r != Role.IGNORE},
        }


def column_letter(index: int) -> str:
    """Spreadsheet column letters of a 0-based index (0 → A, 26 → AA)."""
    n = index + 1
    out = ""
    while n:
        n, rem = divmod(n - 1, 26)
        out = chr(65 + rem) + out
    return out


def column_index(letters: str) -> int | None:
    if not re.fullmatch(r"[A-Za-z]{1,3}", letters):
        return None
    n = 0
    for ch in letters.upper():
        n = n * 26 + ord(ch) - 64
    return n - 1


def _text(v: CellValue) -> str:
    if v is None:
        return ""
    return str(v).strip()


def _header_texts(grid: Grid, r: int, with_group: bool) -> list[str]:
    width = grid.width
    row = grid.rows[r]
    sub = [_text(row[c]) if c < len(row) else "" for c in range(width)]
    if not with_group or r == 0:
        return sub
    above = grid.rows[r - 1]
    group = [_text(above[c]) if c < len(above) else "" for c in range(width)]
    out = []
    carried = ""
    for c in range(width):
        if group[c]:
            carried = group[c]
        # A merged group label sits in its first cell only: carry it right over sub-headers,
        # and stop at a gap in the sub-header row (the group ended).
        elif not sub[c]:
            carried = ""
        g = group[c] or carried
        if sub[c] and g:
            out.append(f"{g} {sub[c]}")
        else:
            out.append(sub[c] or g)
    return out


def _assign(texts: Sequence[str]) -> tuple[list[Role], int]:
    guessed = [guess_role(t) for t in texts]
    roles: list[Role] = [Role.IGNORE] * len(texts)
    taken: set[Role] = set()
    for i, g in enumerate(guessed):
        if isinstance(g, Role) and g not in taken and not (g in LOAD_ROLES and taken & LOAD_ROLES):
            roles[i] = g
            taken.add(g)
    for i, g in enumerate(guessed):
        if g == _AMBIGUOUS_AMPS:
            # "Amps" alone: beside a VA/kVA column it is the breaker trip, otherwise the load current.
            if taken & LOAD_ROLES and Role.BREAKER not in taken:
                roles[i] = Role.BREAKER
            elif not taken & LOAD_ROLES:
                roles[i] = Role.LOAD_AMPS
            else:
                continue
            taken.add(roles[i])
    return roles, len(taken)


def _numeric_share(grid: Grid, start: int, column: int, limit: int = 60) -> tuple[float, list[float]]:
    numbers: list[float] = []
    filled = 0
    for row in grid.rows[start : start + limit]:
        if column < len(row) and row[column] not in (None, ""):
            filled += 1
            n = to_number(row[column])
            if n is not None:
                numbers.append(n)
    return (len(numbers) / filled if filled else 0.0), numbers


def to_number(value: CellValue) -> float | None:
    """A number from a cell: 1200, "1,200", "1.2 kVA" (unit text ignored here); None otherwise."""
    if isinstance(value, bool) or value is None:
        return None
    if isinstance(value, (int, float)):
        return float(value)
    m = re.fullmatch(r"\s*([-+]?\d[\d,]*(?:\.\d+)?|[-+]?\.\d+)\s*([a-zA-Z%]*)\s*", value)
    if not m:
        return None
    try:
        return float(m.group(1).replace(",", ""))
    except ValueError:
        return None


def guess_mapping(grid: Grid) -> ColumnMap:
    """Find the header row (or two-row header band) and guess each column's role."""
    if not grid.rows:
        raise MappingError(f"sheet {grid.name!r} is empty")
    best: tuple[int, int, list[Role], list[str]] | None = None
    for r in range(min(len(grid.rows), HEADER_SEARCH_ROWS)):
        if not any(isinstance(v, str) and v.strip() for v in grid.rows[r]):
            continue
        for with_group in (False, True):
            texts = _header_texts(grid, r, with_group)
            roles, score = _assign(texts)
            if best is None or score > best[1]:
                best = (r, score, roles, texts)
    if best is None or best[1] < 2:
        raise MappingError(
            f"sheet {grid.name!r}: no header row found in the first {HEADER_SEARCH_ROWS} rows "
            "(looked for headings such as Circuit, Description, VA, kVA, Poles, Trip); set the mapping by hand"
        )
    r, _, roles, texts = best
    roles = _check_by_content(grid, r + 1, roles, texts)
    return ColumnMap(header_row=r, roles=tuple(roles), headers=tuple(texts))


def _check_by_content(grid: Grid, start: int, roles: list[Role], texts: list[str]) -> list[Role]:
    """Correct guesses the values contradict: a "Load" column of numbers is a load, not a description."""
    for i, role in enumerate(roles):
        if role in (Role.DESCRIPTION, Role.IGNORE) and normalise(texts[i]) in ("load", "loads"):
            share, numbers = _numeric_share(grid, start, i)
            if share > 0.8 and not any(r in LOAD_ROLES for r in roles):
                roles[i] = detect_load_unit(numbers)
        if role == Role.LOAD_VA and normalise(texts[i]) in ("load", "loads", "w", "watts"):
            _, numbers = _numeric_share(grid, start, i)
            roles[i] = detect_load_unit(numbers)
    if Role.DESCRIPTION not in roles:
        # Without a description heading, the column with the most text is the description.
        best, best_share = None, 0.0
        for i, role in enumerate(roles):
            if role == Role.IGNORE:
                share, _ = _numeric_share(grid, start, i)
                text_share = 1.0 - share
                if text_share > best_share + 1e-9 and text_share > 0.5:
                    best, best_share = i, text_share
        if best is not None:
            roles[best] = Role.DESCRIPTION
    return roles


def detect_load_unit(numbers: Sequence[float]) -> Role:
    """VA or kVA from the values of an unlabelled load column.

    Common practice: branch loads run from tens to a few thousand VA, so a column whose
    non-zero values are mostly below 50 with fractions (0.5, 1.2, 3.6) is in kVA.
    """
    values = [abs(v) for v in numbers if v]
    if not values:
        return Role.LOAD_VA
    small = sum(1 for v in values if v < 50) / len(values)
    fractional = sum(1 for v in values if v != int(v)) / len(values)
    return Role.LOAD_KVA if small > 0.8 and (fractional > 0.2 or max(values) < 20) else Role.LOAD_VA


def mapping_at(grid: Grid, header_row: int) -> ColumnMap:
    """The guess for a header row the user chose (0-based)."""
    if not 0 <= header_row < len(grid.rows):
        raise MappingError(f"sheet {grid.name!r} has no row {header_row + 1} (it has {len(grid.rows)} rows)")
    texts = _header_texts(grid, header_row, True)
    single = _header_texts(grid, header_row, False)
    roles, score = _assign(texts)
    roles_single, score_single = _assign(single)
    if score_single >= score:
        roles, texts = roles_single, single
    roles = _check_by_content(grid, header_row + 1, roles, texts)
    return ColumnMap(header_row=header_row, roles=tuple(roles), headers=tuple(texts))


def parse_overrides(text_or_data: str | Mapping[str, Any], grid: Grid, base: ColumnMap | None = None) -> ColumnMap:
    """Apply a mapping given as JSON: ``{"header_row": 4, "columns": {"C": "kva", "Trip": "breaker"}}``.

    ``header_row`` is the 1-based sheet row of the (last) header row; column keys are letters
    or header text; values are :class:`Role` names.  Columns not named keep the guess.
    """
    if isinstance(text_or_data, str):
        try:
            data = json.loads(text_or_data)
        except json.JSONDecodeError as exc:
            raise MappingError(f"the mapping is not valid JSON: {exc.msg} at column {exc.colno}") from None
    else:
        data = text_or_data
    if not isinstance(data, Mapping):
        raise MappingError('the mapping must be a JSON object like {"columns": {"C": "kva"}}')
    unknown = set(data) - {"header_row", "columns"}
    if unknown:
        raise MappingError(f"the mapping has unknown keys {sorted(unknown)}; use header_row and columns")
    if data.get("header_row") is not None:
        hr = data["header_row"]
        if not isinstance(hr, int) or isinstance(hr, bool) or hr < 1:
            raise MappingError(f"header_row must be a row number (1 or more), not {json.dumps(hr)}")
        cmap = mapping_at(grid, hr - 1)
    else:
        cmap = base if base is not None else guess_mapping(grid)
    columns = data.get("columns") or {}
    if not isinstance(columns, Mapping):
        raise MappingError("columns must be an object of column → role")
    allowed = ", ".join(r.value for r in Role)
    for key, value in columns.items():
        try:
            role = Role(value)
        except ValueError:
            raise MappingError(f"column {key!r}: {json.dumps(value)} is not a role; use one of {allowed}") from None
        index = _find_column(cmap, str(key))
        if index is None:
            raise MappingError(f"column {key!r} is neither a column letter nor a header of the sheet")
        cmap = cmap.with_role(index, role)
    return cmap


def _find_column(cmap: ColumnMap, key: str) -> int | None:
    wanted = normalise(key)
    for i, h in enumerate(cmap.headers):
        if h and normalise(h) == wanted:
            return i
    index = column_index(key)
    return index if index is not None and index < len(cmap.roles) else None
