"""Number formatting shared by the screens, the CLI report and the PDF set.

One set of small pure functions, registered as Jinja filters by both the web templates and
the PDF templates (:func:`register_filters`), so a number is printed the same way
everywhere.  Each returns text; ``None`` (not computed / not given) prints as an em dash.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

DASH = "—"


def _bad(value: float | None) -> bool:
    return value is None or (isinstance(value, float) and not math.isfinite(value))


def va(value: float | None) -> str:
    """Volt-amperes as a whole number with thousands separators: 12,345."""
    if _bad(value):
        return DASH
    return f"{round(value):,}"


def kva(value: float | None, digits: int = 1) -> str:
    """Kilovolt-amperes from kVA: 112.5 → "112.5"."""
    if _bad(value):
        return DASH
    return f"{value:,.{digits}f}"


def va_as_kva(value: float | None, digits: int = 1) -> str:
    """A VA value printed in kVA: 12345 → "12.3"."""
    if _bad(value):
        return DASH
    return kva(value / 1000.0, digits)


def number(value: float | None, digits: int = 0) -> str:
    """A plain number with thousands separators: 1234.5 → "1,235" (digits=0)."""
    if _bad(value):
        return DASH
    return f"{value:,.{digits}f}"


def amps(value: float | None, digits: int = 1) -> str:
    """Amperes with one decimal: 123.4."""
    if _bad(value):
        return DASH
    return f"{value:,.{digits}f}"


def pct(value: float | None, digits: int = 1) -> str:
    """A percentage (value already in %): 2.35 → "2.4 %" with a thin space before the sign."""
    if _bad(value):
        return DASH
    return f"{value:.{digits}f} %"


def ka(value: float | None, digits: int = 1) -> str:
    """Kiloamperes (fault current, short-circuit rating): 22.1 kA."""
    if _bad(value):
        return DASH
    return f"{value:,.{digits}f} kA"


def factor(value: float | None) -> str:
    """A demand factor as a percentage of the connected load: 0.5 → "50 %"."""
    if _bad(value):
        return DASH
    return f"{value * 100.0:.0f} %"


def ratio(value: float | None, digits: int = 1) -> str:
    """A dimensionless ratio such as X/R."""
    if _bad(value):
        return DASH
    return f"{value:.{digits}f}"


def feet(value: float | None) -> str:
    if _bad(value):
        return DASH
    return f"{value:,.0f} ft"


def rating(value: float | int | None, unit: str = "A") -> str:
    """A device rating: 225 → "225 A"; None → dash."""
    if _bad(value):
        return DASH
    number = f"{value:,.0f}" if float(value).is_integer() else f"{value:,.1f}"
    return f"{number} {unit}"


def landing(rotation: int | None) -> str:
    """A panel's feeder landing in the installer's words: 1 → "A→B, B→C, C→A"; 0 or None → ""."""
    if not rotation:
        return ""
    from server.calc.balance import rotation_landing  # the one wording (screens, export, report)

    return rotation_landing(rotation)


def text(value: Any) -> str:
    """Free text, or an em dash when empty."""
    if value is None:
        return DASH
    s = str(value).strip()
    return s or DASH


FILTERS: Mapping[str, Any] = {
    "va": va,
    "kva": kva,
    "va_as_kva": va_as_kva,
    "number": number,
    "amps": amps,
    "pct": pct,
    "ka": ka,
    "factor": factor,
    "ratio": ratio,
    "feet": feet,
    "rating": rating,
    "text": text,
    "landing": landing,
}


def register_filters(env: Any) -> None:
    """Add every formatting function to a Jinja environment's filters (duck-typed: no Jinja import)."""
    env.filters.update(FILTERS)
