"""Existing load from metered interval demand (NEC 220.87).

Role: import a CSV (or an iterable of readings) of interval demand for a service or feeder,
detect its units, interval, gaps, duplicates and daylight-saving repeats, and compute the
existing load as NEC 220.87 allows.  Pure: standard library only.

NEC 220.87 as read here (NFPA 70-2020 and 70-2023 wording, from memory):

* The existing load of a feeder or service may be the actual maximum demand when (1) the
  maximum demand data is available for a 1-year period, (2) the maximum demand at 125 percent
  plus the new load does not exceed the ampacity of the feeder or rating of the service, and
  (3) the overcurrent/overload protection conditions are met.
* Exception (to (1)): if one year of data is not available, the maximum demand (the highest
  average kilowatts reached and maintained for a 15-minute interval) continuously recorded over
  a minimum 30-day period, with a recording ammeter or power meter on the highest loaded phase,
  taken while the building or space is occupied and including (by measurement or calculation)
  the larger of the heating or cooling load and other periodic/seasonal loads.
* Exception No. 2 (2020 onwards): not permitted if the feeder or service has a renewable
  energy system or any form of peak load shaving.

Choices (documented because the code leaves them open):

* **Demand window**: readings are taken as averages over their interval.  When the interval is
  shorter than 15 minutes (and divides 15 minutes), the 15-minute demand is the *rolling*
  (sliding) average over every complete 15-minute window of consecutive readings.  A rolling
  window is never lower than the clock-aligned block average, so it is the conservative reading
  of "reached and maintained for a 15-minute interval".  Intervals of 15 minutes or longer are
  used as recorded (a note warns that intervals over 15 minutes may understate the peak).
* **Basis**: one year when the recording spans at least 365 days (first reading to last reading
  plus one interval); the 30-day alternative when it spans at least 30 days; otherwise
  insufficient (no existing load).  With per-phase data the 30-day basis is the highest loaded
  phase's peak times the number of phases (the Exception meters the highest loaded phase); the
  one-year basis is the coincident total peak.
* **kW to kVA**: kVA = kW / pf with one power factor for the file (default 0.9).
* **Duplicates** (the same instant more than once): the higher reading is kept (conservative).
* **Naive timestamps with a time zone**: a wall-clock time repeated inside the fall-back hour
  with different values is the second pass of that hour (``fold=1``) and counts as a
  daylight-saving repeat, not a duplicate; a time inside the spring-forward hour does not exist
  and is a bad row; the skipped hour is not a gap.  Without a time zone, naive timestamps are
  taken as a fixed offset (a note says so).
* ``peak_at`` is the timestamp of the peak reading (for rolled data: the last reading of the
  15-minute window).

Public API (for the CLI and the web layer): :func:`analyze_csv` (a path, CSV text or uploaded
bytes), :func:`analyze_readings` (readings already in memory), :func:`daily_peaks` (chart
series), :func:`parse_timestamp`; results are :class:`MeteredResult` (``to_json()``);
unusable input raises :class:`server.calc.errors.MeteredDataError` (``bad_rows`` listed).

Speed: a plain file (no quoting, every line well formed) is read block by block with whole-
column string operations and a memo of the distinct number strings; anything irregular sends
the whole file through the row-by-row reader, which gives the same result and explains every
bad row by its line (see ``tests/benchmarks/bench_metered.py``).
"""

from __future__ import annotations

import csv
import io
import math
import os
import re
from bisect import bisect_right
from collections import Counter
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta, tzinfo
from enum import StrEnum
from functools import partial
from itertools import islice, repeat
from operator import add, floordiv, le, lt, sub
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

from server.calc.errors import MeteredDataError

#: NEC 220.87(2): maximum demand at 125 percent (NFPA 70-2023, from memory).
EXISTING_LOAD_FACTOR = 1.25
#: NEC 220.87: demand is the highest average over a 15-minute interval (NFPA 70-2023, from memory).
DEMAND_WINDOW_S = 15 * 60
ONE_YEAR_DAYS = 365.0
MIN_ALTERNATIVE_DAYS = 30.0
DEFAULT_PF = 0.9
RULE = "NFPA 70-2023 220.87 (from memory; 2020 reads the same)"

_EPOCH_DATE = date(1970, 1, 1)
_HEADER_SCAN_ROWS = 20
_TIMESTAMP_HELP = "expected ISO 8601, 'YYYY-MM-DD HH:MM[:SS]' or 'MM/DD/YYYY HH:MM[:SS]'"


class Quantity(StrEnum):
    """What the value columns measure (after scaling to kilo-units for power)."""

    KVA = "kVA"
    KW = "kW"
    AMPS = "A"


class Basis(StrEnum):
    """Which NEC 220.87 route the recording supports."""

    ONE_YEAR = "one year"
    THIRTY_DAY = "30-day alternative"
    INSUFFICIENT = "insufficient: less than 30 days"


@dataclass(frozen=True)
class BadRow:
    """A row left out of the calculation: its physical line in the file and why."""

    line: int
    reason: str

    def to_json(self) -> dict[str, Any]:
        return {"line": self.line, "reason": self.reason}


@dataclass(frozen=True)
class PhasePeak:
    phase: str
    peak_kva: float
    peak_at: datetime

    def to_json(self) -> dict[str, Any]:
        return {"phase": self.phase, "peak_kva": _r(self.peak_kva), "peak_at": self.peak_at.isoformat()}


@dataclass(frozen=True)
class DailyPeak:
    """Highest 15-minute demand of one local calendar day (for charts)."""

    day: date
    peak_kva: float

    def to_json(self) -> dict[str, Any]:
        return {"day": self.day.isoformat(), "peak_kva": _r(self.peak_kva)}


@dataclass(frozen=True)
class MeteredResult:
    """Everything learned from one metered-demand recording; all power in kVA."""

    source: str
    rows: int  # data rows read successfully (duplicates and repeats included)
    readings: int  # distinct instants used after removing duplicates
    unit: str  # unit found in the header: "kW", "W", "kVA", "VA", "MW", "MVA" or "A"
    units_note: str  # what was detected and from which columns
    conversion: str | None  # e.g. "kW converted to kVA at pf 0.90"
    pf: float | None  # the power factor used (kW data only)
    phases: tuple[str, ...]  # ("A", "B", "C") for per-phase data, () for a total only
    interval_minutes: float
    first: datetime
    last: datetime
    coverage_days: float
    gaps: int  # missing intervals
    duplicates: int
    dst_repeats: int
    demand_window: str
    peak_kva: float
    peak_at: datetime
    phase_peaks: tuple[PhasePeak, ...]
    basis: Basis
    basis_kva: float | None  # the maximum demand the 125 % applies to
    existing_load_kva: float | None
    message: str
    notes: tuple[str, ...]
    bad_rows: tuple[BadRow, ...]
    daily_peaks: tuple[DailyPeak, ...]

    def to_json(self) -> dict[str, Any]:
        return {
            "source": self.source,
            "rows": self.rows,
            "readings": self.readings,
            "unit": self.unit,
            "units_note": self.units_note,
            "conversion": self.conversion,
            "pf": self.pf,
            "phases": list(self.phases),
            "interval_minutes": self.interval_minutes,
            "first": self.first.isoformat(),
            "last": self.last.isoformat(),
            "coverage_days": _r(self.coverage_days),
            "gaps": self.gaps,
            "duplicates": self.duplicates,
            "dst_repeats": self.dst_repeats,
            "demand_window": self.demand_window,
            "peak_kva": _r(self.peak_kva),
            "peak_at": self.peak_at.isoformat(),
            "phase_peaks": [p.to_json() for p in self.phase_peaks],
            "basis": self.basis.value,
            "basis_kva": _r(self.basis_kva),
            "existing_load_kva": _r(self.existing_load_kva),
            "existing_load_factor": EXISTING_LOAD_FACTOR,
            "rule": RULE,
            "message": self.message,
            "notes": list(self.notes),
            "bad_rows": [b.to_json() for b in self.bad_rows],
            "daily_peaks": [d.to_json() for d in self.daily_peaks],
        }


def _r(x: float | None, nd: int = 4) -> float | None:
    return None if x is None else round(x, nd)


# --------------------------------------------------------------------------- header detection

#: Power units: token -> (quantity, factor to kilo-units).
_POWER_UNITS: dict[str, tuple[Quantity, float]] = {
    "w": (Quantity.KW, 0.001),
    "watt": (Quantity.KW, 0.001),
    "watts": (Quantity.KW, 0.001),
    "kw": (Quantity.KW, 1.0),
    "kilowatt": (Quantity.KW, 1.0),
    "kilowatts": (Quantity.KW, 1.0),
    "mw": (Quantity.KW, 1000.0),
    "va": (Quantity.KVA, 0.001),
    "kva": (Quantity.KVA, 1.0),
    "mva": (Quantity.KVA, 1000.0),
}
_UNIT_LABEL = {"w": "W", "watt": "W", "watts": "W", "kw": "kW", "kilowatt": "kW", "kilowatts": "kW", "mw": "MW"}
_UNIT_LABEL.update({"va": "VA", "kva": "kVA", "mva": "MVA"})
_CURRENT_WORDS = frozenset({"amp", "amps", "ampere", "amperes", "current", "i"})
_VOLT_WORDS = frozenset({"v", "volt", "volts", "voltage", "kv"})
_OTHER_WORDS = frozenset({"kwh", "wh", "mwh", "kvah", "vah", "kvar", "var", "kvarh", "pf", "hz", "thd"})
_TIME_WORDS = frozenset({"timestamp", "datetime", "time", "date", "interval", "start", "end", "period", "reading"})
_PHASE_LETTER = {"a": "A", "b": "B", "c": "C", "1": "A", "2": "B", "3": "C"}
_PHASE_PREFIX = frozenset({"phase", "ph", "line", "l"})
_GLUED_CURRENT = {"ia": "A", "ib": "B", "ic": "C"}
_GLUED_PHASE = {"pha": "A", "phb": "B", "phc": "C", "la": "A", "lb": "B", "lc": "C"}
_LN_WORDS = frozenset({"ln", "an", "bn", "cn", "lnavg"})
_LL_WORDS = frozenset({"ll", "ab", "bc", "ca", "llavg"})
_VOLTS_LN_BY_PHASE = {"an": "A", "bn": "B", "cn": "C"}


@dataclass(frozen=True)
class _Column:
    index: int
    name: str
    kind: str  # "power", "current", "voltage", "time", "date", "clock", "other"
    quantity: Quantity | None = None
    factor: float = 1.0
    unit: str = ""
    phase: str | None = None
    line_to_line: bool | None = None  # voltage only; None = not stated


def _tokens(name: str) -> list[str]:
    return re.findall(r"[a-z]+|[0-9]+", name.lower())


def _classify(index: int, name: str) -> _Column | None:
    toks = _tokens(name)
    if not toks:
        return None
    phase: str | None = None
    rest: list[str] = []
    i = 0
    while i < len(toks):
        t = toks[i]
        if t in _PHASE_PREFIX and i + 1 < len(toks) and toks[i + 1] in _PHASE_LETTER and phase is None:
            phase = _PHASE_LETTER[toks[i + 1]]
            i += 2
            continue
        if t in _GLUED_PHASE and phase is None:
            phase = _GLUED_PHASE[t]
        elif t in _GLUED_CURRENT and phase is None:
            return _Column(index, name, "current", Quantity.AMPS, 1.0, "A", _GLUED_CURRENT[t])
        else:
            rest.append(t)
        i += 1
    unit_tok = next((t for t in rest if t in _POWER_UNITS or t in _CURRENT_WORDS or t in _VOLT_WORDS), None)
    if unit_tok is None and any(t in _OTHER_WORDS for t in rest):
        return _Column(index, name, "other")
    if unit_tok is None and "a" in rest:
        unit_tok = "a"
    if unit_tok is not None:
        rest.remove(unit_tok)
        if phase is None:
            phase = next((_PHASE_LETTER[t] for t in rest if t in ("a", "b", "c")), None)
    if unit_tok in _POWER_UNITS:
        q, f = _POWER_UNITS[unit_tok]
        return _Column(index, name, "power", q, f, _UNIT_LABEL[unit_tok], phase)
    if unit_tok in _CURRENT_WORDS or unit_tok == "a":
        return _Column(index, name, "current", Quantity.AMPS, 1.0, "A", phase)
    if unit_tok in _VOLT_WORDS:
        ll: bool | None = None
        if any(t in _LL_WORDS for t in rest) or rest.count("l") >= 2 or sum(t in ("a", "b", "c") for t in rest) >= 2:
            ll = True  # "V_LL", "V L-L", "V_AB", "Volts A-B"
        elif any(t in _LN_WORDS for t in rest) or "n" in rest:
            ll = False  # "V_LN", "V_AN", "Voltage A-N"
        vphase = next((_VOLTS_LN_BY_PHASE[t] for t in rest if t in _VOLTS_LN_BY_PHASE), None)
        if vphase is None and ll is False:
            vphase = phase
        return _Column(index, name, "voltage", None, 1000.0 if unit_tok == "kv" else 1.0, "V", vphase, ll)
    if any(t in ("timestamp", "datetime") for t in toks) or ("date" in toks and "time" in toks):
        return _Column(index, name, "time")
    if "date" in toks:
        return _Column(index, name, "date")
    if "time" in toks:
        return _Column(index, name, "clock")
    if any(t in _TIME_WORDS for t in toks):
        return _Column(index, name, "time")
    return None


@dataclass(frozen=True)
class _Plan:
    """Which columns are used and how their values become kW or kVA."""

    ncols: int
    time_index: int | None  # a single timestamp column
    date_index: int | None  # or a date column plus a time column
    clock_index: int | None
    quantity: Quantity  # after conversion: KW or KVA
    unit: str
    total: _Column | None
    phases: tuple[_Column, ...]
    volts: tuple[_Column | None, ...]  # amps data: voltage column per value column (None = --volts)
    note: str
    ignored: tuple[str, ...]

    @property
    def value_columns(self) -> tuple[_Column, ...]:
        return ((self.total,) if self.total else ()) + self.phases


def _plan(header: list[str], *, volts: float | None) -> tuple[_Plan | None, str]:
    """Choose the columns of a header row; ``(None, why)`` when it is not a usable header."""
    cols = [c for i, h in enumerate(header) if (c := _classify(i, h.strip())) is not None]
    times = [c for c in cols if c.kind == "time"]
    dates = [c for c in cols if c.kind == "date"]
    clocks = [c for c in cols if c.kind == "clock"]
    time_index = date_index = clock_index = None
    if dates and clocks:
        date_index, clock_index = dates[0].index, clocks[0].index
    elif times:
        time_index = times[0].index
    elif dates:
        time_index = dates[0].index
    elif clocks:
        time_index = clocks[0].index
    else:
        return None, "no timestamp column (a header such as 'timestamp', 'date time' or 'date' + 'time')"

    power = [c for c in cols if c.kind == "power"]
    current = [c for c in cols if c.kind == "current"]
    voltage = [c for c in cols if c.kind == "voltage"]
    chosen: list[_Column]
    notes: list[str] = []
    if any(c.quantity == Quantity.KVA for c in power):
        chosen = [c for c in power if c.quantity == Quantity.KVA]
        quantity = Quantity.KVA
    elif power:
        chosen = list(power)
        quantity = Quantity.KW
    elif current:
        chosen = list(current)
        quantity = Quantity.KVA
        if not voltage and volts is None:
            names = ", ".join(c.name for c in current)
            return None, f"current columns ({names}) need a voltage: add a V_LN or V_LL column, or give volts"
    else:
        other = [c.name for c in cols if c.kind == "other"]
        if other:
            return None, (
                f"no demand column: {', '.join(other)} are not demand (energy, reactive power or power factor); "
                "give kW, kVA, W, VA or amps per interval"
            )
        return None, "no demand column (headers naming kW, kVA, W, VA, or amps with a voltage)"

    # The same (phase) twice: keep the first, say so.
    seen: dict[str | None, _Column] = {}
    ignored: list[str] = []
    for c in chosen:
        if c.phase in seen:
            ignored.append(c.name)
        else:
            seen[c.phase] = c
    total = seen.pop(None, None)
    phases = tuple(sorted(seen.values(), key=lambda c: c.phase or ""))
    used = {c.index for c in (total, *phases) if c is not None}
    units = {c.unit for c in (total, *phases) if c is not None}
    if len(units) > 1:
        return None, f"value columns mix units ({', '.join(sorted(units))}); use one unit for every column"
    unit = units.pop()

    volt_cols: list[_Column | None] = []
    if chosen[0].kind == "current":
        by_phase = {v.phase: v for v in voltage if v.phase}
        general = next((v for v in voltage if not v.phase), voltage[0] if voltage else None)
        for c in (total, *phases):
            if c is None:
                continue
            v = by_phase.get(c.phase) if c.phase else None
            volt_cols.append(v or (general if volts is None else None))
        for v in {id(v): v for v in volt_cols if v is not None}.values():
            used.add(v.index)
            if v.line_to_line is None:
                notes.append(f"voltage column '{v.name}' taken as line-to-neutral (name it V_LL if it is line-to-line)")
        if volts is not None and all(v is None for v in volt_cols):
            notes.append(f"amps converted with {volts:g} V line-to-neutral (given)")
    desc_cols = ", ".join(c.name for c in (total, *phases) if c is not None)
    if phases:
        desc = f"{unit} detected from headers {desc_cols}; per phase {', '.join(c.phase or '' for c in phases)}"
    else:
        desc = f"{unit} detected from header {desc_cols}"
    if total and phases:
        desc += " (the total column sets the peak; the phase columns give the phase peaks)"
    if chosen[0].kind == "current":
        desc += "; converted to kVA as amps × line-to-neutral volts per phase"
        if total and not phases:
            notes.append("a single current column is taken as single-phase: kVA = A × V (voltage as given) / 1000")
    ignored += [
        h
        for i, h in enumerate(header)
        if i not in used and i not in (time_index, date_index, clock_index) and h.strip()
    ]
    plan = _Plan(
        ncols=len(header),
        time_index=time_index,
        date_index=date_index,
        clock_index=clock_index,
        quantity=Quantity.KVA if quantity == Quantity.KVA else Quantity.KW,
        unit=unit,
        total=total,
        phases=phases,
        volts=tuple(volt_cols),
        note=desc,
        ignored=tuple(ignored),
    )
    return plan, "; ".join(notes)


# --------------------------------------------------------------------------- timestamps


def _parse_mdy(s: str) -> datetime:
    """'MM/DD/YYYY HH:MM[:SS][ AM|PM]' (US meter exports)."""
    s = s.strip()
    d, _, t = s.partition(" ")
    m, dd, y = d.split("/")
    t = t.strip()
    ampm = ""
    if t[-2:].upper() in ("AM", "PM"):
        ampm = t[-2:].upper()
        t = t[:-2].strip()
    parts = t.split(":") if t else ["0", "0"]
    if len(parts) not in (2, 3) or len(y) != 4:
        raise ValueError(s)
    h, mi = int(parts[0]), int(parts[1])
    sec = int(parts[2]) if len(parts) == 3 else 0
    if ampm:
        if not 1 <= h <= 12:
            raise ValueError(s)
        h = h % 12 + (12 if ampm == "PM" else 0)
    return datetime(int(y), int(m), int(dd), h, mi, sec)


def parse_timestamp(s: str) -> datetime:
    """Parse one timestamp; raises ``ValueError`` when no accepted form matches."""
    s = s.strip()
    if "/" in s:
        return _parse_mdy(s)
    return datetime.fromisoformat(s)


# --------------------------------------------------------------------------- reading the file


@dataclass
class _Columns:
    """Columnar readings in file order (mutable while being built)."""

    lines: Sequence[int]  # physical line of each reading
    times: list[datetime]
    total: list[float] | None
    phases: list[list[float]]
    bad: list[BadRow]
    scale: float = 1.0  # multiplies every value to reach kW or kVA (applied to results only)
    wall_days: list[int] | None = None  # local day ordinal of each reading, when already known
    wall_days_follow: bool = False  # those days are in order whenever the instants are


def _decode(data: bytes, name: str) -> tuple[str, str | None]:
    if not data.strip():
        raise MeteredDataError("the file is empty", source=name)
    if b"\x00" in data[:4096]:
        raise MeteredDataError("not a CSV text file (binary content)", source=name)
    try:
        return data.decode("utf-8-sig"), None
    except UnicodeDecodeError:
        return data.decode("latin-1"), "file is not UTF-8; read as Latin-1"


def _sniff_delimiter(text: str) -> str:
    sample = [ln for ln in text[:8192].splitlines() if ln.strip()][: _HEADER_SCAN_ROWS + 2]
    best, best_count = ",", 0
    for d in (",", ";", "\t", "|"):
        count = sum(ln.count(d) for ln in sample)
        if count > best_count:
            best, best_count = d, count
    return best


def _find_header(rows: list[list[str]], name: str, volts: float | None) -> tuple[int, _Plan, str]:
    first_why = ""
    first_row: list[str] | None = None
    for i, row in enumerate(rows[:_HEADER_SCAN_ROWS]):
        if not row or not any(c.strip() for c in row):
            continue
        plan, why = _plan(row, volts=volts)
        if plan is not None:
            return i, plan, why
        if first_row is None:
            first_row, first_why = row, why
    shown = ", ".join(first_row or [])[:120]
    raise MeteredDataError(f"no usable columns: {first_why}; first row was '{shown}'", source=name)


def _value_parser(plan: _Plan, volts: float | None) -> Callable[[list[str]], tuple[float | None, list[float]]]:
    """Row → (total, phase values) in kilo-units; raises ``ValueError`` with a reason."""
    cols = plan.value_columns
    vcols = plan.volts

    def num(row: list[str], c: _Column) -> float:
        raw = row[c.index].strip()
        if not raw:
            raise ValueError(f"{c.name} is empty")
        try:
            x = float(raw)
        except ValueError:
            raise ValueError(f"{c.name}: '{raw}' is not a number") from None
        if not math.isfinite(x):
            raise ValueError(f"{c.name}: '{raw}' is not a finite number")
        if x < 0:
            raise ValueError(f"{c.name}: negative reading {raw} (export or a sign convention?)")
        return x

    def parse(row: list[str]) -> tuple[float | None, list[float]]:
        out: list[float] = []
        for k, c in enumerate(cols):
            x = num(row, c) * c.factor
            if vcols:
                v = vcols[k]
                if v is None:
                    x = x * (volts or 0.0) / 1000.0
                else:
                    vv = num(row, v) * v.factor
                    if v.line_to_line and c.phase:
                        vv /= math.sqrt(3)
                    x = x * vv / 1000.0
            out.append(x)
        if plan.total is not None:
            return out[0], out[1:]
        return None, out

    return parse


def _read_rows(text: str, name: str, volts: float | None) -> tuple[_Plan, list[str], _Columns]:
    notes: list[str] = []
    delim = _sniff_delimiter(text)
    try:
        head = list(islice(csv.reader(io.StringIO(text), delimiter=delim), _HEADER_SCAN_ROWS))
    except csv.Error as exc:
        raise MeteredDataError(f"not a readable CSV file ({exc})", source=name) from None
    hi, plan, why = _find_header(head, name, volts)
    if why:
        notes.append(why)
    if plan.ignored:
        notes.append(f"columns not used: {', '.join(plan.ignored)}")
    cols = None if plan.volts else _fast_columns(text, delim, hi, plan)
    if cols is None:
        try:
            cols = _slow_columns(text, delim, hi, plan, volts)
        except csv.Error as exc:
            raise MeteredDataError(f"not a readable CSV file ({exc})", source=name) from None
    return plan, notes, cols


#: The fast path works on blocks of about this many characters, so that the strings of one
#: block are freed and their memory reused while still in the processor cache.
_CHUNK_CHARS = 1 << 16


def _fast_columns(text: str, delim: str, header_row: int, plan: _Plan) -> _Columns | None:
    """Block-wise column parsing with C-level string and map operations (no per-row objects).

    Only for the plain case: no quoting, no stray carriage return, every line with the
    header's number of fields (checked per block by total), every timestamp and number well
    formed and every value finite and not negative.  ``None`` as soon as anything differs; the
    row-by-row reader then finds and explains it.  A line with too many or too few fields
    shifts the columns, so a timestamp lands among the numbers (or the reverse) and parsing
    fails: the row-by-row reader takes over.
    """
    if '"' in text:
        return None
    if "\r" in text:
        text = text.replace("\r\n", "\n")
        if "\r" in text:
            return None
    start = 0
    for _ in range(header_row + 1):
        start = text.find("\n", start) + 1
        if start == 0:
            return None
    body = text[start:].rstrip("\n")  # trailing blank lines are skipped by both readers
    if not body:
        return None
    ncols = plan.ncols
    value_index = [c.index for c in plan.value_columns]
    times: list[datetime] = []
    series: list[list[float]] = [[] for _ in value_index]
    numbers = _Numbers()
    parse_time: Callable[[str], datetime] | None = None
    nlines = 0
    pos, size = 0, len(body)
    while pos < size:
        end = body.find("\n", pos + _CHUNK_CHARS)
        if end == -1:
            end = size
        block = body[pos:end]
        pos = end + 1
        lines = block.count("\n") + 1
        if block.count(delim) != (ncols - 1) * lines:
            return None
        nlines += lines
        flat = block.replace("\n", delim).split(delim)
        if plan.time_index is not None:
            raw_t: Sequence[str] = flat[plan.time_index :: ncols]
        else:
            dates = flat[plan.date_index :: ncols]  # type: ignore[misc]
            clocks = flat[plan.clock_index :: ncols]  # type: ignore[misc]
            raw_t = list(map(" ".join, zip(dates, clocks, strict=True)))
        if parse_time is None:
            parse_time = _parse_mdy if "/" in raw_t[0] else datetime.fromisoformat
        try:
            times += map(parse_time, raw_t)
        except ValueError:
            return None
        for out, i in zip(series, value_index, strict=True):
            vals = numbers.convert(flat[i::ncols])
            if vals is None:
                return None
            out += vals
    total = series[0] if plan.total is not None else None
    phases = series[1:] if plan.total is not None else series
    first_line = header_row + 2  # physical line of the first data row (1-based)
    scale = plan.value_columns[0].factor  # one unit for every value column (checked by _plan)
    return _Columns(range(first_line, first_line + nlines), times, total, phases, [], scale)


#: Marks a string not converted yet: found by identity (list.index), and being a float it
#: compares with the other entries at float speed.  Never stored: NaN readings are refused.
_NEW = float("nan")


class _Numbers:
    """Text to float for the fast path, checking every number is finite and not negative.

    Meter readings are quantised (a few thousand distinct strings in a year of 15-minute
    data), so each distinct string is converted and checked once and looked up after that.
    When most strings turn out distinct, plain conversion is cheaper and is used from then on.
    """

    def __init__(self) -> None:
        self.number: dict[str, float] = {}
        self.seen = 0
        self.plain = False

    def convert(self, texts: list[str]) -> list[float] | None:
        if self.plain:
            try:
                vals = list(map(float, texts))
            except ValueError:
                return None
            return vals if math.isfinite(sum(vals)) and min(vals) >= 0 else None
        number = self.number
        looked_up = list(map(number.get, texts, repeat(_NEW)))
        if _NEW not in looked_up:
            return looked_up
        self.seen += len(texts)
        if self.seen > 30_000 and len(number) * 2 > self.seen:  # hardly any repeats: stop memoising
            self.plain = True
            return self.convert(texts)
        # Fill in the new strings in place: list.index finds each at C speed.
        find = looked_up.index
        k = -1
        while True:
            try:
                k = find(_NEW, k + 1)
            except ValueError:
                return looked_up
            text = texts[k]
            x = number.get(text)
            if x is None:
                try:
                    x = float(text)
                except ValueError:
                    return None
                if not 0.0 <= x < math.inf:  # negative, infinite or NaN
                    return None
                number[text] = x
            looked_up[k] = x


def _slow_columns(text: str, delim: str, header_row: int, plan: _Plan, volts: float | None) -> _Columns:
    """Row by row, with physical line numbers and a reason for every bad row."""
    parse_values = _value_parser(plan, volts)
    reader = csv.reader(io.StringIO(text), delimiter=delim)
    out = _Columns([], [], [] if plan.total is not None else None, [[] for _ in plan.phases], [])
    prev_end = 0
    needed = max(
        [c.index for c in plan.value_columns]
        + [v.index for v in plan.volts if v is not None]
        + [i for i in (plan.time_index, plan.date_index, plan.clock_index) if i is not None]
    )
    for k, row in enumerate(reader):
        line = prev_end + 1
        prev_end = reader.line_num
        if k <= header_row or not row or not any(c.strip() for c in row):
            continue
        if len(row) != plan.ncols and not (len(row) > plan.ncols and not any(c.strip() for c in row[plan.ncols :])):
            if len(row) <= needed or len(row) > plan.ncols:
                out.bad.append(BadRow(line, f"{len(row)} fields where the header has {plan.ncols}"))
                continue
        if plan.time_index is not None:
            raw = row[plan.time_index]
        else:
            raw = f"{row[plan.date_index]} {row[plan.clock_index]}"  # type: ignore[index]
        try:
            ts = parse_timestamp(raw)
        except (ValueError, IndexError):
            out.bad.append(BadRow(line, f"timestamp '{raw.strip()}' not understood ({_TIMESTAMP_HELP})"))
            continue
        try:
            total, ph = parse_values(row)
        except ValueError as exc:
            out.bad.append(BadRow(line, str(exc)))
            continue
        out.lines.append(line)
        out.times.append(ts)
        if out.total is not None:
            out.total.append(total)  # type: ignore[arg-type]
        for lst, x in zip(out.phases, ph, strict=True):
            lst.append(x)
    return out


# --------------------------------------------------------------------------- analysis core


#: Marks a day on which the zone's UTC offset changes (readings that day are placed one by one).
_CHANGES: Any = timedelta.min  # a timedelta, so scanning a list of offsets compares at timedelta speed
_EPOCH_ORDINAL = _EPOCH_DATE.toordinal()


class _WallDays(dict[int, Any]):
    """UTC offset (a timedelta) of a zone per wall-clock day (proleptic ordinal), or ``_CHANGES``.

    A dict so that lookups run at C speed (``map(d.__getitem__, ...)``); a day is computed once.
    A day is taken as constant when its midnights agree and the next midnight is not in a
    change window: tz data has no zone with two opposite changes within one day.
    """

    def __init__(self, tz: tzinfo) -> None:
        super().__init__()
        self.tz = tz
        self._windows: dict[int, tuple[datetime, datetime, timedelta, timedelta]] = {}
        self._midnights: dict[tuple[int, int], timedelta] = {}

    def __missing__(self, day: int) -> Any:
        # The clocks change during this day when its two midnights differ (fold 0 at a midnight
        # reads the offset in force before any change), or when the next midnight lies inside
        # a change window that starts today (there fold 1 differs from fold 0; checked only
        # when the day after changes, to keep to one zone look-up per day).
        here, there = self._midnight(day, 0), self._midnight(day + 1, 0)
        if here != there or (self._midnight(day + 2, 0) != there and self._midnight(day + 1, 1) != there):
            value = _CHANGES
        else:
            value = here
        self[day] = value
        return value

    def prefill(self, first: int, last: int) -> None:
        """Compute days ``first``..``last`` in one sweep (C-level maps over the midnights)."""
        days = range(first, last + 3)
        at = partial(datetime.replace, tzinfo=self.tz)
        offs = list(map(datetime.utcoffset, map(at, map(datetime.fromordinal, days))))
        self._midnights.update(zip(zip(days, repeat(0)), offs, strict=True))
        for i, day in enumerate(range(first, last + 1)):
            here, there = offs[i], offs[i + 1]
            if here != there or (offs[i + 2] != there and self._midnight(day + 1, 1) != there):
                self[day] = _CHANGES
            else:
                self[day] = here

    def _midnight(self, day: int, fold: int) -> timedelta:
        key = (day, fold)
        off = self._midnights.get(key)
        if off is None:
            off = self._midnights[key] = _offset(datetime.fromordinal(day), self.tz, fold)
        return off

    def offsets(self, t: datetime) -> tuple[timedelta, timedelta]:
        """(offset with fold=0, with fold=1) of wall-clock ``t`` on a day the offset changes.

        Wall-clock times of such a day pass through three states: before the change both folds
        give the old offset; inside the skipped or repeated window fold 0 gives the old and
        fold 1 the new; after it both give the new.  The window is found once per day by
        bisection over its minutes (tz data changes clocks on whole minutes).
        """
        day = t.toordinal()
        window = self._windows.get(day)
        if window is None:
            window = self._windows[day] = self._window(day)
        start, end, before, after = window
        if t < start:
            return before, before
        if t >= end:
            return after, after
        return before, after

    def _window(self, day: int) -> tuple[datetime, datetime, timedelta, timedelta]:
        a = datetime.fromordinal(day)
        tz = self.tz
        before = _offset(a, tz, 0)
        after = _offset(a + timedelta(seconds=86399), tz, 1)

        def state(minute: int) -> int:  # 0 before, 1 inside, 2 after the change
            t = a + timedelta(minutes=minute)
            o0, o1 = _offset(t, tz, 0), _offset(t, tz, 1)
            if o0 != o1:
                return 1
            return 0 if o0 == before and before != after else 2

        def first(at_least: int) -> int:
            lo, hi = 0, 1440
            while lo < hi:
                mid = (lo + hi) // 2
                if state(mid) >= at_least:
                    hi = mid
                else:
                    lo = mid + 1
            return lo

        return a + timedelta(minutes=first(1)), a + timedelta(minutes=first(2)), before, after


def _offset(naive: datetime, tz: tzinfo, fold: int) -> timedelta:
    return naive.replace(tzinfo=tz, fold=fold).utcoffset() or timedelta(0)


class _UtcDays(dict[float, float]):
    """UTC offset (s) of a zone per UTC day (days since 1970), or ``_CHANGES``."""

    def __init__(self, tz: tzinfo) -> None:
        super().__init__()
        self.tz = tz

    def __missing__(self, day: float) -> float:
        a = datetime.fromtimestamp(day * 86400.0, UTC)
        o1 = a.astimezone(self.tz).utcoffset()
        o2 = (a + timedelta(seconds=86399)).astimezone(self.tz).utcoffset()
        value = o1.total_seconds() if o1 == o2 and o1 is not None else _CHANGES
        self[day] = value
        return value


def _indices_of(values: list[Any], marker: object) -> list[int]:
    """Positions holding ``marker`` itself (identity: list.index scans at C speed)."""
    out: list[int] = []
    k = -1
    while True:
        try:
            k = values.index(marker, k + 1)
        except ValueError:
            return out
        out.append(k)


def _naive(t: datetime) -> datetime:
    return t.replace(tzinfo=None)


def _zone_name(tz: tzinfo) -> str:
    return getattr(tz, "key", None) or str(tz)


def _take(cols: _Columns, keep: list[int]) -> None:
    """Keep only readings ``keep`` (indices in file order), in every column."""
    cols.lines = [cols.lines[k] for k in keep]
    cols.times = [cols.times[k] for k in keep]
    if cols.total is not None:
        cols.total = [cols.total[k] for k in keep]
    cols.phases = [[p[k] for k in keep] for p in cols.phases]


def _row_values(cols: _Columns) -> Callable[[int], tuple[float, ...]]:
    series = ([cols.total] if cols.total is not None else []) + cols.phases
    return lambda k: tuple(s[k] for s in series)


def _instants(
    cols: _Columns, tz: tzinfo | None, notes: list[str], *, check_mixed: bool = True
) -> tuple[list[Any], list[Any], int, list[BadRow], Callable[[Any, int], datetime]]:
    """Instants and wall-clock times of every reading, in file order.

    Without ``tz``: the datetimes themselves (naive ones taken at a fixed offset), which
    order, subtract and compare at C speed.  With ``tz``: naive timestamps become naive UTC
    datetimes (wall clock: the timestamps); offset timestamps give UTC seconds and wall-clock
    seconds (floats).

    Returns ``(u, w, dst_repeats, bad, to_datetime)``; readings found bad here are already
    removed from ``cols``.  ``to_datetime(u, k)`` gives the timestamp to show for reading ``k``.
    With ``check_mixed=False`` a mix of naive and offset timestamps is not looked for; it then
    shows as a ``TypeError`` when instants are subtracted, and the caller asks again.
    """
    times = cols.times
    n = len(times)
    bad: list[BadRow] = []
    aware = times[0].utcoffset() is not None
    if check_mixed or (aware and tz is not None):
        offsets = set(map(datetime.utcoffset, times))
        if None in offsets and len(offsets) > 1:
            # Mixed naive and offset timestamps: the first reading sets the file's form.
            form = "a UTC offset" if aware else "no UTC offset"
            keep: list[int] = []
            for k in range(n):
                if (times[k].utcoffset() is not None) == aware:
                    keep.append(k)
                else:
                    bad.append(
                        BadRow(
                            cols.lines[k], f"timestamp '{times[k].isoformat()}' differs in form from the first ({form})"
                        )
                    )
            _take(cols, keep)
            times = cols.times
            n = len(times)

    if tz is None:
        if not aware:
            notes.append(
                "timestamps carry no UTC offset and no time zone was given: read as a fixed offset "
                "(a daylight-saving repeat would show as duplicates, a skipped hour as a gap)"
            )
        # The datetimes themselves order, subtract and compare correctly (offsets included).
        return times, times, 0, bad, lambda x, k: cols.times[k]

    if aware:  # every timestamp carries its UTC offset: show them in ``tz``
        u = list(map(datetime.timestamp, times))
        utc_days = _UtcDays(tz)
        offs = list(map(utc_days.__getitem__, map(floordiv, u, repeat(86400.0))))
        for k in _indices_of(offs, _CHANGES):
            o = datetime.fromtimestamp(u[k], UTC).astimezone(tz).utcoffset()
            offs[k] = o.total_seconds() if o is not None else 0.0
        w = list(map(add, u, offs))
        return u, w, 0, bad, lambda x, k: datetime.fromtimestamp(x, tz)

    # Naive wall-clock times in ``tz``: instants become naive UTC datetimes.
    wall_days = _WallDays(tz)
    ordinals = list(map(datetime.toordinal, times))
    # The first and last readings usually bound the recording; any day outside is looked up lazily.
    first_day, last_day = sorted((ordinals[0], ordinals[-1]))
    if last_day - first_day <= 4 * n + 400:  # a recording, not a scatter of far-apart dates
        wall_days.prefill(first_day, last_day)
    offs = list(map(wall_days.__getitem__, ordinals))
    dst_repeats = 0
    passes: dict[datetime, list[int | None]] = {}  # ambiguous wall time -> [first pass, second pass]
    drop: list[int] = []
    values = _row_values(cols)
    changing = _indices_of(offs, _CHANGES)
    # Between clock changes wall time runs with the instants, so once the instants are in order
    # the local days are too, except perhaps next to a reading on a change day: check those.
    last = n - 1
    follow = all(
        (k == 0 or ordinals[k - 1] <= ordinals[k]) and (k == last or ordinals[k] <= ordinals[k + 1]) for k in changing
    )
    for k in changing:  # in file order: the first pass comes first
        t = times[k]
        o0, o1 = wall_days.offsets(t)
        if o0 == o1:
            offs[k] = o0
        elif o0 > o1:  # inside the fall-back hour: this wall-clock time happens twice
            seen = passes.get(t)
            if seen is None:
                passes[t] = [k, None]
                offs[k] = o0
            elif values(k) == values(seen[0]):  # type: ignore[arg-type]
                offs[k] = o0  # the same values again: a duplicate of the first pass
            else:
                offs[k] = o1
                if seen[1] is None:
                    seen[1] = k
                    dst_repeats += 1
        else:  # inside the spring-forward hour: this wall-clock time never happens
            offs[k] = o0
            drop.append(k)
            bad.append(
                BadRow(
                    cols.lines[k],
                    f"{t.isoformat(sep=' ')} does not exist in {_zone_name(tz)} (daylight-saving clock change)",
                )
            )
    if drop:
        dropped = set(drop)
        keep = [k for k in range(n) if k not in dropped]
        _take(cols, keep)
        offs = [offs[k] for k in keep]
        ordinals = [ordinals[k] for k in keep]
    cols.wall_days = ordinals
    cols.wall_days_follow = follow and not drop
    u = list(map(sub, cols.times, offs))
    return u, cols.times, dst_repeats, bad, lambda x, k: x.replace(tzinfo=UTC).astimezone(tz)


def _rolling(u: list[Any], series: list[list[float]], iv: Any, iv_s: float) -> tuple[list[int], list[list[float]]]:
    """15-minute rolling means of readings ``iv`` seconds apart; only complete windows count.

    Returns the position (in ``u``) of each window's last reading and the means per series.
    """
    k = round(DEMAND_WINDOW_S / iv_s)
    span = (k - 1) * iv  # seconds or a timedelta, like the instants
    ends = [j for j in range(k - 1, len(u)) if u[j] - u[j - k + 1] == span]
    out: list[list[float]] = []
    for s in series:
        prefix = [0.0]
        acc = 0.0
        for x in s:
            acc += x
            prefix.append(acc)
        out.append([(prefix[j + 1] - prefix[j + 1 - k]) / k for j in ends])
    return ends, out


def _secs(x: Any) -> float:
    """Seconds of a difference of instants (a timedelta, or already seconds)."""
    return x.total_seconds() if isinstance(x, timedelta) else float(x)


def _sum_series(series: list[list[float]]) -> list[float]:
    """Element-wise sum of equally long series (C-level maps: no per-row tuples)."""
    acc: Iterable[float] = series[0]
    for s in series[1:]:
        acc = map(add, acc, s)
    return list(acc)


def _fmt_minutes(x: float) -> str:
    return f"{x:g}"


def _analyze(
    cols: _Columns,
    *,
    source: str,
    quantity: Quantity,
    unit: str,
    units_note: str,
    phase_names: tuple[str, ...],
    pf: float,
    tz: tzinfo | None,
    notes: list[str],
) -> MeteredResult:
    bad = list(cols.bad)
    placed: list[str] = []
    first_bad: list[BadRow] = []
    try:
        try:
            u, w, dst_repeats, first_bad, to_dt = _instants(cols, tz, placed, check_mixed=False)
            deltas = list(map(sub, islice(u, 1, None), u))
            more_bad: list[BadRow] = first_bad
        except TypeError:  # naive and offset timestamps mixed: sort them out, then place again
            bad += first_bad
            placed = []
            u, w, dst_repeats, more_bad, to_dt = _instants(cols, tz, placed)
            deltas = list(map(sub, islice(u, 1, None), u))
    except (OverflowError, ValueError):  # datetime's range ends at years 1 and 9999
        raise MeteredDataError(
            f"timestamps from {min(cols.times, key=_naive).date()} to {max(cols.times, key=_naive).date()} cannot be "
            f"placed in {_zone_name(tz) if tz else 'UTC'} (too near year 1 or 9999)",
            source=source,
        ) from None
    notes += placed
    wall_is_instant = w is u  # then local days follow the instants' order
    bad += more_bad
    bad.sort(key=lambda b: b.line)
    n = len(u)
    if n < 2:
        raise MeteredDataError(
            f"needs at least two usable readings, found {n}" + (f" ({len(bad)} bad rows)" if bad else ""),
            source=source,
            bad_rows=tuple((b.line, b.reason) for b in bad),
        )
    rows = n
    total = cols.total if cols.total is not None else _sum_series(cols.phases)
    phases = cols.phases

    # Time order, then one reading per instant (the higher total is kept: conservative).
    step = deltas[0]
    regular = deltas.count(step) == len(deltas) and step > step * 0
    if regular:  # in order and evenly spaced: the usual case
        iv = step
        deltas = []
        duplicates = 0
        index: list[int] | range = range(n)
        in_order = True
    else:
        in_order = all(map(lt, u, islice(u, 1, None)))
        duplicates = 0
        if in_order:
            index = range(n)
        else:
            kept: list[int] = []
            for k in sorted(range(n), key=u.__getitem__):
                if kept and u[kept[-1]] == u[k]:
                    duplicates += 1
                    if total[k] > total[kept[-1]]:
                        kept[-1] = k
                else:
                    kept.append(k)
            index = kept
            u = [u[k] for k in kept]
            w = [w[k] for k in kept]
            total = [total[k] for k in kept]
            phases = [[p[k] for k in kept] for p in phases]
        if len(u) < 2:
            raise MeteredDataError("needs at least two distinct timestamps", source=source)
        deltas = list(map(sub, islice(u, 1, None), u))
        counts = Counter(deltas)
        iv = max(counts.items(), key=lambda kv: (kv[1], -kv[0]))[0]
    readings = len(u)
    iv_s = _secs(iv)
    interval_minutes = iv_s / 60.0
    gaps = 0
    irregular = 0
    for d in (d for d in deltas if d != iv):
        steps = d / iv
        whole = round(steps)
        if abs(steps - whole) > 1e-6:
            irregular += 1
        gaps += max(whole - 1, 0)
    if irregular:
        notes.append(
            f"{irregular} spacings are not a whole number of {_fmt_minutes(interval_minutes)}-minute intervals"
        )

    # The 15-minute demand series.
    if iv_s < DEMAND_WINDOW_S and abs(DEMAND_WINDOW_S / iv_s - round(DEMAND_WINDOW_S / iv_s)) < 1e-9:
        ends, rolled = _rolling(u, [total, *phases], iv, iv_s)
        if not ends:
            raise MeteredDataError(
                f"no complete 15-minute window of {_fmt_minutes(interval_minutes)}-minute readings", source=source
            )
        pos = ends
        d_total, d_phases = rolled[0], rolled[1:]
        window = (
            f"15-minute rolling average of {_fmt_minutes(interval_minutes)}-minute readings "
            "(complete windows only; never below the block average)"
        )
    else:
        pos: list[int] | range = range(readings)
        d_total, d_phases = total, phases
        window = f"readings as recorded ({_fmt_minutes(interval_minutes)}-minute intervals)"
        if iv_s < DEMAND_WINDOW_S:
            notes.append(
                f"{_fmt_minutes(interval_minutes)}-minute interval does not divide 15 minutes: readings used as "
                "recorded (the peak may be overstated)"
            )
        elif iv_s > DEMAND_WINDOW_S:
            notes.append(
                f"{_fmt_minutes(interval_minutes)}-minute interval is longer than the 15-minute demand interval of "
                "220.87: the 15-minute peak may be understated"
            )

    to_kva = cols.scale / pf if quantity == Quantity.KW else cols.scale
    conversion = f"kW converted to kVA at pf {pf:.2f}" if quantity == Quantity.KW else None

    def at(p: int) -> datetime:
        return to_dt(u[p], index[p])

    peak = max(d_total)
    jp = d_total.index(peak)
    peak_kva = peak * to_kva
    peak_at = at(pos[jp])
    phase_peaks = []
    for name, s in zip(phase_names, d_phases, strict=True):
        m = max(s)
        phase_peaks.append(PhasePeak(name, m * to_kva, at(pos[s.index(m)])))

    coverage_days = _secs(u[-1] - u[0] + iv) / 86400.0
    if gaps:
        notes.append(
            f"{gaps} missing intervals: 220.87 asks for a continuous recording; check the gaps do not hide the peak"
        )
    if coverage_days >= ONE_YEAR_DAYS:
        basis = Basis.ONE_YEAR
        basis_kva: float | None = peak_kva
        message = (
            f"One year or more recorded ({coverage_days:.1f} days): maximum demand {peak_kva:.1f} kVA × 1.25 = "
            f"{peak_kva * EXISTING_LOAD_FACTOR:.1f} kVA existing load; {RULE}"
        )
    elif coverage_days >= MIN_ALTERNATIVE_DAYS:
        basis = Basis.THIRTY_DAY
        if phase_peaks:
            top = max(phase_peaks, key=lambda p: p.peak_kva)
            basis_kva = max(top.peak_kva * len(phase_peaks), peak_kva)
            basis_txt = f"highest loaded phase {top.phase} {top.peak_kva:.1f} kVA × {len(phase_peaks)} phases"
        else:
            basis_kva = peak_kva
            basis_txt = f"{peak_kva:.1f} kVA"
        message = (
            f"Less than a year recorded ({coverage_days:.1f} days): 30-day alternative, {basis_txt} × 1.25 = "
            f"{basis_kva * EXISTING_LOAD_FACTOR:.1f} kVA existing load; {RULE}, Exception"
        )
        notes.append(
            "30-day alternative: confirm the recording was made while the building was occupied, on the highest "
            "loaded phase, and that the larger of the heating or cooling load and other seasonal loads are included "
            "by measurement or calculation (220.87 Exception, from memory)"
        )
    else:
        basis = Basis.INSUFFICIENT
        basis_kva = None
        message = (
            f"Only {coverage_days:.1f} days recorded: 220.87 needs one year of maximum demand data, or at least "
            f"30 days under its Exception ({RULE}). No existing load computed; record longer or calculate the load."
        )
    existing = None if basis_kva is None else basis_kva * EXISTING_LOAD_FACTOR
    if basis != Basis.INSUFFICIENT:
        notes.append(
            "220.87 is not used where the feeder or service has a renewable energy system or peak load shaving "
            "(220.87 Exception No. 2, from memory); the 125 % load plus the new load must fit the feeder ampacity "
            "or the service rating"
        )
    if bad:
        notes.append(f"{len(bad)} bad rows left out (listed)")

    daily = _daily(
        w,
        pos,
        d_total,
        to_kva,
        days_sorted=(wall_is_instant or cols.wall_days_follow) and in_order and isinstance(index, range),
        step=iv if regular and wall_is_instant else None,
        days_known=cols.wall_days if isinstance(index, range) else None,
    )
    return MeteredResult(
        source=source,
        rows=rows,
        readings=readings,
        unit=unit,
        units_note=units_note,
        conversion=conversion,
        pf=pf if quantity == Quantity.KW else None,
        phases=phase_names,
        interval_minutes=interval_minutes,
        first=at(0),
        last=at(readings - 1),
        coverage_days=coverage_days,
        gaps=gaps,
        duplicates=duplicates,
        dst_repeats=dst_repeats,
        demand_window=window,
        peak_kva=peak_kva,
        peak_at=peak_at,
        phase_peaks=tuple(phase_peaks),
        basis=basis,
        basis_kva=basis_kva,
        existing_load_kva=existing,
        message=message,
        notes=tuple(notes),
        bad_rows=tuple(bad),
        daily_peaks=daily,
    )


def _daily(
    w: list[Any],
    pos: list[int] | range,
    series: list[float],
    to_kva: float,
    *,
    days_sorted: bool = False,
    step: Any = None,
    days_known: list[int] | None = None,
) -> tuple[DailyPeak, ...]:
    """Peak per local calendar day of the demand series (window ends ``pos`` in ``w``).

    ``w`` holds wall-clock datetimes or wall-clock seconds since 1970; days are proleptic
    Gregorian ordinals either way.
    """
    if step is not None and isinstance(pos, range) and isinstance(w[0], datetime) and w[0].tzinfo is None:
        # Evenly spaced naive readings in order: each day's first reading follows by arithmetic.
        t0, n = w[0], len(series)
        first_day, last_day = t0.toordinal(), w[-1].toordinal()
        bounds = [0] + [-((t0 - datetime.fromordinal(d)) // step) for d in range(first_day + 1, last_day + 1)] + [n]
        return tuple(
            DailyPeak(date.fromordinal(first_day + i), max(series[bounds[i] : bounds[i + 1]]) * to_kva)
            for i in range(last_day - first_day + 1)
            if bounds[i] < bounds[i + 1]  # a day without readings (intervals longer than a day)
        )
    wp = w if isinstance(pos, range) else [w[p] for p in pos]
    if days_known is not None and isinstance(pos, range):
        days: list[float] = days_known  # type: ignore[assignment]
    elif wp and isinstance(wp[0], datetime):
        days = list(map(datetime.toordinal, wp))
    else:
        days = [d + _EPOCH_ORDINAL for d in map(floordiv, wp, repeat(86400.0))]
    out: list[DailyPeak] = []
    if days_sorted or all(map(le, days, islice(days, 1, None))):  # local days in order: slice per day
        start, n = 0, len(days)
        while start < n:
            d = days[start]
            end = bisect_right(days, d, start)
            out.append(DailyPeak(date.fromordinal(int(d)), max(series[start:end]) * to_kva))
            start = end
        return tuple(out)
    best: dict[float, float] = {}
    for d, x in zip(days, series, strict=True):
        if x > best.get(d, -1.0):
            best[d] = x
    return tuple(DailyPeak(date.fromordinal(int(d)), best[d] * to_kva) for d in sorted(best))


# --------------------------------------------------------------------------- public API


def _check_pf(pf: float, source: str) -> None:
    if not (isinstance(pf, int | float) and 0.0 < pf <= 1.0):
        raise MeteredDataError(f"power factor must be above 0 and at most 1, got {pf!r}", source=source)


def _zone(tz: str | tzinfo | None, source: str) -> tzinfo | None:
    if tz is None or isinstance(tz, tzinfo):
        return tz
    try:
        return ZoneInfo(tz)
    except (ValueError, KeyError, OSError):
        raise MeteredDataError(
            f"unknown time zone '{tz}' (use an Area/City name such as America/Chicago)", source=source
        ) from None


def _refuse_if_strict(strict: bool, cols: _Columns, source: str) -> None:
    if strict and cols.bad:
        raise MeteredDataError(
            f"refused (strict): {len(cols.bad)} bad rows; nothing was imported",
            source=source,
            bad_rows=tuple((b.line, b.reason) for b in sorted(cols.bad, key=lambda b: b.line)),
        )


def analyze_csv(
    source: str | bytes | os.PathLike[str],
    *,
    pf: float = DEFAULT_PF,
    tz: str | tzinfo | None = None,
    strict: bool = False,
    volts: float | None = None,
    name: str | None = None,
) -> MeteredResult:
    """Existing load (NEC 220.87) from a CSV of interval demand readings.

    ``source`` is a path (``pathlib.Path`` or any ``os.PathLike``), the CSV text itself (a
    ``str``) or its raw bytes (an upload; UTF-8, else read as Latin-1); ``name`` labels messages
    (default: the path, or "CSV text").  ``pf`` converts kW to kVA (kVA = kW / pf); ``tz`` (an IANA name such as
    ``"America/Chicago"``) places naive timestamps; ``strict`` refuses the whole file when any
    row is bad; ``volts`` is the line-to-neutral voltage for amps data without a voltage column.
    Raises :class:`MeteredDataError` (naming the file and the problem) when nothing usable remains.
    """
    if isinstance(source, os.PathLike):
        path = Path(source)
        label = name or str(path)
        try:
            data = path.read_bytes()
        except FileNotFoundError:
            raise MeteredDataError("file not found", source=label) from None
        except IsADirectoryError:
            raise MeteredDataError("is a folder, not a CSV file", source=label) from None
        except OSError as exc:
            raise MeteredDataError(f"cannot be read ({exc.strerror or exc})", source=label) from None
        text, enc_note = _decode(data, label)
    elif isinstance(source, bytes | bytearray):
        label = name or "CSV text"
        text, enc_note = _decode(bytes(source), label)
    else:
        label = name or "CSV text"
        if not source.strip():
            raise MeteredDataError("the file is empty", source=label)
        if "\x00" in source[:4096]:
            raise MeteredDataError("not a CSV text file (binary content)", source=label)
        text, enc_note = source.lstrip("\ufeff"), None
    _check_pf(pf, label)
    zone = _zone(tz, label)
    if volts is not None and not (isinstance(volts, int | float) and volts > 0 and math.isfinite(volts)):
        raise MeteredDataError(f"volts must be a positive number, got {volts!r}", source=label)
    plan, notes, cols = _read_rows(text, label, volts)
    if enc_note:
        notes.insert(0, enc_note)
    _refuse_if_strict(strict, cols, label)
    if not cols.times:
        raise MeteredDataError(
            "no usable readings" + (f": all {len(cols.bad)} data rows are bad" if cols.bad else " (no data rows)"),
            source=label,
            bad_rows=tuple((b.line, b.reason) for b in cols.bad),
        )
    result = _analyze(
        cols,
        source=label,
        quantity=plan.quantity,
        unit=plan.unit,
        units_note=plan.note,
        phase_names=tuple(c.phase or "" for c in plan.phases),
        pf=pf,
        tz=zone,
        notes=notes,
    )
    if strict and result.bad_rows:  # e.g. a time that does not exist in the zone
        raise MeteredDataError(
            f"refused (strict): {len(result.bad_rows)} bad rows; nothing was imported",
            source=label,
            bad_rows=tuple((b.line, b.reason) for b in result.bad_rows),
        )
    return result


Reading = tuple[datetime | str, float | Sequence[float]]


def analyze_readings(
    rows: Iterable[Reading],
    *,
    unit: str = "kVA",
    phases: Sequence[str] = (),
    pf: float = DEFAULT_PF,
    tz: str | tzinfo | None = None,
    strict: bool = False,
    source: str = "readings",
) -> MeteredResult:
    """Existing load (NEC 220.87) from readings already in memory.

    Each row is ``(timestamp, value)`` or, with ``phases`` (e.g. ``("A", "B", "C")``),
    ``(timestamp, (value_a, value_b, value_c))``.  Timestamps are ``datetime`` objects or strings
    in the CSV forms.  ``unit`` is one of kW, kVA, W, VA, MW, MVA.  Bad rows are reported with
    their 1-based position as the line.
    """
    key = unit.strip().lower()
    if key not in _POWER_UNITS:
        raise MeteredDataError(f"unit must be one of kW, kVA, W, VA, MW, MVA, got '{unit}'", source=source)
    quantity, factor = _POWER_UNITS[key]
    _check_pf(pf, source)
    zone = _zone(tz, source)
    nph = len(phases)
    cols = _Columns([], [], None if nph else [], [[] for _ in range(nph)], [])
    for line, row in enumerate(rows, start=1):
        try:
            ts_raw, vals = row
        except (TypeError, ValueError):
            cols.bad.append(BadRow(line, "expected (timestamp, value)"))
            continue
        if isinstance(ts_raw, datetime):
            ts = ts_raw
        else:
            try:
                ts = parse_timestamp(str(ts_raw))
            except (ValueError, IndexError):
                cols.bad.append(BadRow(line, f"timestamp '{ts_raw}' not understood ({_TIMESTAMP_HELP})"))
                continue
        seq = list(vals) if nph and isinstance(vals, Sequence) and not isinstance(vals, str) else [vals]
        if len(seq) != max(nph, 1):
            cols.bad.append(BadRow(line, f"expected {max(nph, 1)} values, found {len(seq)}"))
            continue
        try:
            xs = [float(v) for v in seq]
        except (TypeError, ValueError):
            cols.bad.append(BadRow(line, f"value {vals!r} is not a number"))
            continue
        if not all(math.isfinite(x) and x >= 0 for x in xs):
            cols.bad.append(BadRow(line, f"value {vals!r} is negative or not finite"))
            continue
        cols.lines.append(line)
        cols.times.append(ts)
        if nph:
            for lst, x in zip(cols.phases, xs, strict=True):
                lst.append(x * factor)
        else:
            cols.total.append(xs[0] * factor)  # type: ignore[union-attr]
    _refuse_if_strict(strict, cols, source)
    if not cols.times:
        raise MeteredDataError(
            "no usable readings", source=source, bad_rows=tuple((b.line, b.reason) for b in cols.bad)
        )
    label = _UNIT_LABEL[key]
    note = f"{label} given" + (f"; per phase {', '.join(phases)}" if nph else "")
    return _analyze(
        cols,
        source=source,
        quantity=quantity,
        unit=label,
        units_note=note,
        phase_names=tuple(phases),
        pf=pf,
        tz=zone,
        notes=[],
    )


def daily_peaks(result: MeteredResult) -> list[tuple[str, float]]:
    """``[(ISO date, peak kVA), ...]`` per local day, oldest first: the series for a chart."""
    return [(d.day.isoformat(), d.peak_kva) for d in result.daily_peaks]
