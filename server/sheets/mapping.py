"""Finding the header row of a sheet and guessing what each column holds.

A :class:`ColumnMap` says, for each column, which :class:`Role` it plays (slot, description,
a load in VA / kVA / amps, poles, breaker trip, phase, category, notes ...).  The guess reads
the header text; a header band of two rows (a merged group label such as "BREAKER" over
"TRIP" and "POLES") is read as one.  The user corrects the guess in the browser, or the CLI
takes corrections as JSON (:func:`parse_overrides`).  Nothing here validates circuits.

Two-column layout: most panel schedules put the odd circuits in the left half of the sheet
and the even circuits in the right half of the same row (``CKT | DESCRIPTION | VA | POLES |
TRIP || TRIP | POLES | VA | DESCRIPTION | CKT``, mirrored or not, often with a phase column
between the halves).  When the header row holds two blocks that each have a slot or
description column and a load or trip column, and repeat at least two of those headings, the
guess is a two-column map: :attr:`ColumnMap.split` is the first column of the right block and
each block has its own roles.  A phase or panel column serves both halves when only one
block has one (the "A B C" column in the middle).
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

#: Roles that describe the whole physical row in a two-column layout (the phase column between
#: the halves): a block without its own takes the other block's.
SHARED_ROLES = frozenset({Role.PHASE, Role.PANEL})


class Layout(StrEnum):
    """How circuits sit on the sheet.  Values are the names used in mapping JSON and the form."""

    SINGLE = "single"  # one circuit per row
    TWO_COLUMN = "two-column"  # odd circuits in the left half, even circuits in the right half


class Side(StrEnum):
    LEFT = "left"
    RIGHT = "right"


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
#: Any rule at all: one search answers "no role" for most texts (data rows met by the header search).
_ANY_RULE = re.compile("|".join(f"(?:{p})" for p, _ in _RULES))


def normalise(text: str) -> str:
    """Lower-case header text with punctuation turned into spaces ("Ckt #" → "ckt no")."""
    t = text.lower().replace("#", " no ").replace("\n", " ")
    t = re.sub(r"[^a-z0-9 ]+", " ", t)
    return re.sub(r"\s+", " ", t).strip()


def guess_role(header: str) -> Role | str | None:
    t = normalise(header)
    if not t or not _ANY_RULE.search(t):
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
    split: int | None = None  # two-column layout: first column of the right block; None = single column

    @property
    def layout(self) -> Layout:
        return Layout.SINGLE if self.split is None else Layout.TWO_COLUMN

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

    def side_of(self, column: int) -> Side | None:
        if self.split is None:
            return None
        return Side.LEFT if column < self.split else Side.RIGHT

    def block(self, side: Side) -> range:
        """The columns of one half (the whole sheet in the single-column layout)."""
        if self.split is None:
            return range(len(self.roles))
        return range(0, self.split) if side == Side.LEFT else range(self.split, len(self.roles))

    def side_map(self, side: Side) -> ColumnMap:
        """One half as a single-column map: the other half's columns ignored, except a shared
        phase or panel column when this half has none."""
        if self.split is None:
            return self
        own = self.block(side)
        mine = {self.roles[i] for i in own}
        roles = tuple(
            r if i in own or (r in SHARED_ROLES and r not in mine) else Role.IGNORE for i, r in enumerate(self.roles)
        )
        return ColumnMap(header_row=self.header_row, roles=roles, headers=self.headers)

    def with_role(self, column: int, role: Role) -> ColumnMap:
        """A copy with ``column`` set to ``role``; another column of the same block holding the same role gives it up."""
        roles = list(self.roles)
        while len(roles) <= column:
            roles.append(Role.IGNORE)
        if role != Role.IGNORE:
            clash = {role} | (LOAD_ROLES if role in LOAD_ROLES else set())
            block = self.block(self.side_of(column) or Side.LEFT) if self.split is not None else range(len(roles))
            roles = [Role.IGNORE if r in clash and i in block else r for i, r in enumerate(roles)]
        roles[column] = role
        return replace(self, roles=tuple(roles))

    def deduplicated(self) -> ColumnMap:
        """A copy where a role held by two columns of one block stays with the first."""
        roles = list(self.roles)
        sides = (Side.LEFT, Side.RIGHT) if self.split is not None else (Side.LEFT,)
        for side in sides:
            seen: set[Role] = set()
            for i in self.block(side) if self.split is not None else range(len(roles)):
                r = roles[i]
                key = Role.LOAD_VA if r in LOAD_ROLES else r
                if r != Role.IGNORE and key in seen:
                    roles[i] = Role.IGNORE
                else:
                    seen.add(key)
        return replace(self, roles=tuple(roles))

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {"header_row": self.header_row + 1}
        if self.split is not None:
            out["layout"] = Layout.TWO_COLUMN.value
            out["right_starts"] = column_letter(self.split)
        out["columns"] = {column_letter(i): r.value for i, r in enumerate(self.roles) if r != Role.IGNORE}
        return out


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
    return _assign_guessed([guess_role(t) for t in texts])


def _assign_guessed(guessed: Sequence[Role | str | None]) -> tuple[list[Role], int]:
    roles: list[Role] = [Role.IGNORE] * len(guessed)
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


_NUMBER_TEXT = re.compile(r"[\d\s.,+\-]*")


def guess_mapping(grid: Grid) -> ColumnMap:
    """Find the header row (or two-row header band) and guess each column's role.

    A header row holding two circuit blocks side by side gives a two-column map.
    """
    if not grid.rows:
        raise MappingError(f"sheet {grid.name!r} is empty")
    best: tuple[int, int, list[Role], list[str]] | None = None
    for r in range(min(len(grid.rows), HEADER_SEARCH_ROWS)):
        if not any(isinstance(v, str) and v.strip() for v in grid.rows[r]):
            continue
        for with_group in (False, True):
            texts = _header_texts(grid, r, with_group)
            # each text gives at most one role and numbers give none: a row with no more words than
            # the best score so far cannot beat it (the data rows below the header, mostly)
            if best is not None and sum(1 for t in texts if t and not _NUMBER_TEXT.fullmatch(t)) <= best[1]:
                continue
            roles, score = _assign(texts)
            if best is None or score > best[1]:
                best = (r, score, roles, texts)
    if best is None or best[1] < 2:
        raise MappingError(
            f"sheet {grid.name!r}: no header row found in the first {HEADER_SEARCH_ROWS} rows "
            "(looked for headings such as Circuit, Description, VA, kVA, Poles, Trip); set the mapping by hand"
        )
    r, _, roles, texts = best
    return _finish(grid, r, texts, roles)


def _finish(
    grid: Grid, r: int, texts: list[str], roles: list[Role], layout: Layout | None = None, split: int | None = None
) -> ColumnMap:
    """The map for header row ``r``: two-column when asked for or detected, else single-column."""
    if layout != Layout.SINGLE:
        if split is None:
            split = detect_split(texts)
            if split is None and layout == Layout.TWO_COLUMN:
                split = max(len(texts) // 2, 1)  # nothing detected: the middle, for the user to move
        if split is not None:
            split = min(max(split, 1), max(len(texts) - 1, 1))
            left, _ = _assign(texts[:split])
            right, _ = _assign(texts[split:])
            two = left + right
            two = _check_by_content(grid, r + 1, two, texts, range(0, split))
            two = _check_by_content(grid, r + 1, two, texts, range(split, len(texts)))
            two = _phase_by_content(grid, r + 1, two)
            return ColumnMap(header_row=r, roles=tuple(two), headers=tuple(texts), split=split)
    roles = _check_by_content(grid, r + 1, roles, texts)
    return ColumnMap(header_row=r, roles=tuple(roles), headers=tuple(texts))


#: Roles that make a block a circuit table: one of the first set and one of the second.
_NAMING = frozenset({Role.SLOT, Role.DESCRIPTION})
_LOADING = LOAD_ROLES | {Role.BREAKER}
_CORE = frozenset({Role.SLOT, Role.DESCRIPTION, Role.POLES, Role.BREAKER, Role.LOAD_VA})


def _kinds(roles: Sequence[Role]) -> set[Role]:
    return {Role.LOAD_VA if r in LOAD_ROLES else r for r in roles if r != Role.IGNORE}


def detect_split(texts: Sequence[str]) -> int | None:
    """The first column of the right block when the headers hold two circuit blocks, else None.

    Each block must name its circuits (slot or description) and hold a load or trip column, and
    the blocks must share at least two of slot, description, poles, trip and load (repeated
    header texts, in the same or mirrored order).  Of the splits that qualify, the one assigning
    the most roles wins; then the most even one.
    """
    width = len(texts)
    guessed = [guess_role(t) for t in texts]
    if sum(1 for g in guessed if g is not None) < 4:
        return None  # two blocks need at least two roles each
    best: tuple[int, float, int] | None = None
    for p in range(2, width - 1):
        left, left_score = _assign_guessed(guessed[:p])
        right, right_score = _assign_guessed(guessed[p:])
        lk, rk = _kinds(left), _kinds(right)
        if not (lk & _NAMING and rk & _NAMING and lk & _LOADING and rk & _LOADING):
            continue
        if len(lk & rk & _CORE) < 2:
            continue
        key = (left_score + right_score, -abs(p - width / 2), p)
        if best is None or key > best:
            best = key
    return best[2] if best is not None else None


def _phase_by_content(grid: Grid, start: int, roles: list[Role]) -> list[Role]:
    """An unlabelled column of A/B/C letters (the middle of a two-column schedule) is the phase column."""
    if Role.PHASE in roles:
        return roles
    for i, role in enumerate(roles):
        if role != Role.IGNORE:
            continue
        values = [row[i] for row in grid.rows[start : start + 60] if i < len(row) and row[i] not in (None, "")]
        if len(values) >= 2 and all(isinstance(v, str) and re.fullmatch(r"\s*[ABCabc]\s*", v) for v in values):
            roles[i] = Role.PHASE
            return roles
    return roles


def _check_by_content(
    grid: Grid, start: int, roles: list[Role], texts: list[str], columns: range | None = None
) -> list[Role]:
    """Correct guesses the values contradict: a "Load" column of numbers is a load, not a description.

    ``columns``: the block checked (one half of a two-column sheet); the whole row by default.
    """
    cols = columns if columns is not None else range(len(roles))
    block = [roles[i] for i in cols]
    for i in cols:
        role = roles[i]
        if role in (Role.DESCRIPTION, Role.IGNORE) and normalise(texts[i]) in ("load", "loads"):
            share, numbers = _numeric_share(grid, start, i)
            if share > 0.8 and not any(r in LOAD_ROLES for r in block):
                roles[i] = detect_load_unit(numbers)
                block = [roles[j] for j in cols]
        if role == Role.LOAD_VA and normalise(texts[i]) in ("load", "loads", "w", "watts"):
            _, numbers = _numeric_share(grid, start, i)
            roles[i] = detect_load_unit(numbers)
    if Role.DESCRIPTION not in block:
        # Without a description heading, the column with the most text is the description.
        best, best_share = None, 0.0
        for i in cols:
            if roles[i] == Role.IGNORE:
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


def mapping_at(grid: Grid, header_row: int, layout: Layout | None = None, split: int | None = None) -> ColumnMap:
    """The guess for a header row the user chose (0-based).

    ``layout`` None detects the layout; ``split`` is the right block's first column (two-column).
    """
    if not 0 <= header_row < len(grid.rows):
        raise MappingError(f"sheet {grid.name!r} has no row {header_row + 1} (it has {len(grid.rows)} rows)")
    texts = _header_texts(grid, header_row, True)
    single = _header_texts(grid, header_row, False)
    roles, score = _assign(texts)
    roles_single, score_single = _assign(single)
    if score_single >= score:
        roles, texts = roles_single, single
    return _finish(grid, header_row, texts, roles, layout, split)


_MAPPING_KEYS = ("header_row", "layout", "right_starts", "columns", "left", "right")


def parse_overrides(text_or_data: str | Mapping[str, Any], grid: Grid, base: ColumnMap | None = None) -> ColumnMap:
    """Apply a mapping given as JSON.

    Single column: ``{"header_row": 4, "columns": {"C": "kva", "Trip": "breaker"}}``.
    Two-column: ``{"layout": "two-column", "right_starts": "G", "columns": {"C": "kva", "I": "kva"},
    "left": {"Trip": "breaker"}, "right": {"Trip": "breaker"}}``.

    ``header_row`` is the 1-based sheet row of the (last) header row; ``layout`` is ``single``
    or ``two-column`` (omitted: detected); ``right_starts`` is the letter of the right block's
    first column (omitted: detected).  ``columns`` keys are letters or header text; ``left`` and
    ``right`` look header text up within that half only (headers repeat across the halves).
    Values are :class:`Role` names.  Columns not named keep the guess.
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
    unknown = set(data) - set(_MAPPING_KEYS)
    if unknown:
        raise MappingError(f"the mapping has unknown keys {sorted(unknown)}; use {', '.join(_MAPPING_KEYS)}")
    layout: Layout | None = None
    if data.get("layout") is not None:
        try:
            layout = Layout(data["layout"])
        except ValueError:
            raise MappingError(
                f"layout must be {Layout.SINGLE.value!r} or {Layout.TWO_COLUMN.value!r}, "
                f"not {json.dumps(data['layout'])}"
            ) from None
    split: int | None = None
    if data.get("right_starts") is not None:
        if layout == Layout.SINGLE:
            raise MappingError("right_starts applies to the two-column layout only")
        layout = Layout.TWO_COLUMN
        rs = data["right_starts"]
        index = column_index(rs) if isinstance(rs, str) else None
        if index is None or not 1 <= index < max(grid.width, 2):
            last = column_letter(max(grid.width - 1, 1))
            raise MappingError(
                f"right_starts must be a column letter from B to {last} (the right half's first column), "
                f"not {json.dumps(rs)}"
            )
        split = index
    if data.get("header_row") is not None:
        hr = data["header_row"]
        if not isinstance(hr, int) or isinstance(hr, bool) or hr < 1:
            raise MappingError(f"header_row must be a row number (1 or more), not {json.dumps(hr)}")
        cmap = mapping_at(grid, hr - 1, layout, split)
    else:
        cmap = base if base is not None else guess_mapping(grid)
        if layout is not None and (layout != cmap.layout or (split is not None and split != cmap.split)):
            cmap = mapping_at(grid, cmap.header_row, layout, split)
    allowed = ", ".join(r.value for r in Role)
    for part in ("columns", "left", "right"):
        columns = data.get(part) or {}
        if not isinstance(columns, Mapping):
            raise MappingError(f"{part} must be an object of column → role")
        side = None if part == "columns" else Side(part)
        if side is not None and columns and cmap.split is None:
            raise MappingError(f'"{part}" applies to the two-column layout; this mapping is single-column')
        for key, value in columns.items():
            try:
                role = Role(value)
            except ValueError:
                raise MappingError(f"column {key!r}: {json.dumps(value)} is not a role; use one of {allowed}") from None
            index = _find_column(cmap, str(key), cmap.block(side) if side is not None else None)
            if index is None:
                where = f"a header of the {part} half" if side is not None else "a header of the sheet"
                raise MappingError(f"{part.rstrip('s')} {key!r} is neither a column letter nor {where}")
            cmap = cmap.with_role(index, role)
    return cmap


def _find_column(cmap: ColumnMap, key: str, within: range | None = None) -> int | None:
    cols = within if within is not None else range(len(cmap.roles))
    wanted = normalise(key)
    for i in cols:
        h = cmap.headers[i] if i < len(cmap.headers) else ""
        if h and normalise(h) == wanted:
            return i
    index = column_index(key)
    return index if index is not None and index in cols else None
