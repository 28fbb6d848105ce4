"""Published tables as data, each file citing its source and edition.

Every ``*.json`` file in this folder holds one published table (or a few small related
ones) with a top-level ``source`` (document, edition, table number) and ``note`` (which
values were entered from memory and must be checked against the printed edition).  The
loaders below read them once (``functools.lru_cache``) and hand out immutable views; the
calculation modules never hard-code a table value.  Lookups on the engine's hot path
(ampacity, 240.4(D) limits, section numbers, demand tiers, circular mils) are memoised too:
they are pure functions of a few strings and numbers, and a recompute asks the same few
hundred questions many thousands of times.

``conductor_sizes`` is also used by the project-file parser to check typed sizes.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from functools import cache, lru_cache
from pathlib import Path
from types import MappingProxyType
from typing import Any

_HERE = Path(__file__).parent

CONDUCTOR_SIZES: tuple[str, ...] = (
    "14", "12", "10", "8", "6", "4", "3", "2", "1", "1/0", "2/0", "3/0", "4/0",
    "250", "300", "350", "400", "500", "600", "700", "750", "800", "900", "1000",
)  # fmt: skip

TEMPERATURE_COLUMNS_C: tuple[int, ...] = (60, 75, 90)


def conductor_sizes() -> tuple[str, ...]:
    """Conductor sizes in ascending order (AWG then kcmil), as in NFPA 70 Table 310.16."""
    return CONDUCTOR_SIZES


def size_index(size: str) -> int:
    """Position of ``size`` in :func:`conductor_sizes` (ascending); ValueError if unknown."""
    try:
        return CONDUCTOR_SIZES.index(size)
    except ValueError:
        raise ValueError(f"unknown conductor size {size!r}; use AWG (14…4/0) or kcmil (250…1000)") from None


def _edition(code: Any) -> str:
    """The edition key used in the data files ("NEC-2023"), from a CodeEdition or its value.

    Also the key of any other StrEnum (material, conduit, occupancy).  Reading ``_value_`` is
    several times cheaper than the ``value`` property, and this runs in the engine's hot path.
    """
    if type(code) is str:
        return code
    value = getattr(code, "_value_", None)  # an Enum member: the plain attribute behind ``.value``
    if value is None:
        value = getattr(code, "value", code)
    return str(value)


@cache
def load(name: str) -> dict[str, Any]:
    """The parsed JSON file ``name`` (without ``.json``).  Treat the result as read-only."""
    with (_HERE / f"{name}.json").open(encoding="utf-8") as fh:
        return json.load(fh)


def source_of(name: str) -> dict[str, Any]:
    """The ``source`` and ``note`` of a data file, for reports and tests."""
    data = load(name)
    return {"source": data["source"], "note": data["note"]}


def data_files() -> tuple[str, ...]:
    """Names of every data file in this folder."""
    return tuple(sorted(p.stem for p in _HERE.glob("*.json")))


# --- code section numbers by edition ---------------------------------------------------


@cache
def section(key: str, code: Any) -> str:
    """Edition-correct section or table number of a rule (``code_sections.json``)."""
    return load("code_sections")["sections"][key][_edition(code)]


# --- Table 310.16 ampacity ---------------------------------------------------------------


@cache
def ampacity_table() -> MappingProxyType[str, MappingProxyType[str, tuple[float, float, float]]]:
    """NFPA 70 Table 310.16 (Table 310.15(B)(16) in 2017): material → size → (60, 75, 90 °C) amperes."""
    data = load("ampacity_310_16")
    out: dict[str, MappingProxyType[str, tuple[float, float, float]]] = {}
    for material in ("Cu", "Al"):
        out[material] = MappingProxyType({size: tuple(float(a) for a in row) for size, row in data[material].items()})
    return MappingProxyType(out)


@lru_cache(maxsize=1024)  # bounded: the size may come from a typed value
def ampacity_a(size: str, material: Any, column_c: int) -> float | None:
    """Table 310.16 ampacity, or None where the table has no row (e.g. 14 AWG aluminium)."""
    if column_c not in TEMPERATURE_COLUMNS_C:
        raise ValueError(f"temperature column must be 60, 75 or 90 °C, not {column_c!r}")
    row = ampacity_table()[_edition(material)].get(size)
    if row is None:
        return None
    return row[TEMPERATURE_COLUMNS_C.index(column_c)]


@cache
def ampacity_column(material: Any, column_c: int) -> tuple[float | None, ...]:
    """One column of Table 310.16: the ampacity of every size of :func:`conductor_sizes`, in
    that order (None where the table has no row), for searches that step through the sizes."""
    return tuple(ampacity_a(size, material, column_c) for size in CONDUCTOR_SIZES)


@lru_cache(maxsize=1024)  # bounded: the size may come from a typed value
def small_conductor_max_ocpd_a(size: str, material: Any) -> int | None:
    """NEC 240.4(D) limit on the overcurrent device of 14–10 AWG conductors (None above 10 AWG)."""
    limits = load("ampacity_310_16")["small_conductor_max_ocpd_a"][_edition(material)]
    value = limits.get(size)
    return None if value is None else int(value)


# --- ambient correction and adjustment ---------------------------------------------------


@dataclass(frozen=True)
class AmbientRow:
    range_c: str
    max_c: float
    factors: tuple[float | None, float | None, float | None]  # 60, 75, 90 °C columns


@cache
def ambient_rows() -> tuple[AmbientRow, ...]:
    """Ambient correction rows (30 °C basis), ascending by upper bound."""
    return tuple(
        AmbientRow(r["range_c"], float(r["max_c"]), tuple(r["factors"]))  # type: ignore[arg-type]
        for r in load("ambient_correction")["rows"]
    )


@dataclass(frozen=True)
class AdjustmentRow:
    min_count: int
    max_count: int | None
    factor: float


@cache
def adjustment_rows() -> tuple[AdjustmentRow, ...]:
    """Adjustment factors for more than three current-carrying conductors."""
    return tuple(
        AdjustmentRow(int(r["min"]), None if r["max"] is None else int(r["max"]), float(r["factor"]))
        for r in load("adjustment_factors")["rows"]
    )


# --- overcurrent devices and grounding ---------------------------------------------------


@cache
def standard_ocpd_ratings() -> tuple[int, ...]:
    """NEC 240.6(A) standard ampere ratings of fuses and inverse-time breakers, ascending."""
    return tuple(sorted(int(a) for a in load("ocpd_240_6")["standard_a"]))


@cache
def standard_ratings_with_fuses() -> tuple[int, ...]:
    """240.6(A) ratings plus the additional fuse-only ratings (1, 3, 6, 10, 601 A)."""
    data = load("ocpd_240_6")
    return tuple(sorted({int(a) for a in data["standard_a"]} | {int(a) for a in data["additional_fuse_a"]}))


@cache
def egc_rows() -> tuple[tuple[int, str, str], ...]:
    """Table 250.122 rows: (OCPD rating not exceeding, Cu size, Al size), ascending."""
    return tuple((int(r["max_ocpd_a"]), str(r["Cu"]), str(r["Al"])) for r in load("egc_250_122")["rows"])


@lru_cache(maxsize=1024)  # bounded: the size may come from a typed value
def circular_mils(size: str) -> float:
    """Conductor area in circular mils: Chapter 9 Table 8 for AWG; kcmil × 1000 by definition."""
    awg = load("chapter9_table8")["circular_mils"]
    if size in awg:
        return float(awg[size])
    try:
        return float(size) * 1000.0
    except ValueError:
        raise ValueError(f"unknown conductor size {size!r}") from None


# --- Chapter 9 Table 9 -------------------------------------------------------------------


@dataclass(frozen=True)
class Table9Row:
    """Ohms to neutral per 1000 ft, 75 °C, 60 Hz, three single conductors in conduit."""

    size: str
    xl_pvc_al: float  # reactance in PVC or aluminium conduit
    xl_steel: float  # reactance in steel conduit
    r: MappingProxyType[tuple[str, str], float | None]  # (material, conduit) → AC resistance
    interpolated: bool = False

    def resistance(self, material: Any, conduit: Any) -> float | None:
        return self.r[(_edition(material), _edition(conduit))]

    def reactance(self, conduit: Any) -> float:
        return self.xl_steel if _edition(conduit) == "steel" else self.xl_pvc_al


_T9_R_COLUMNS = {
    "r_cu_pvc": ("Cu", "pvc"),
    "r_cu_al": ("Cu", "aluminum"),
    "r_cu_steel": ("Cu", "steel"),
    "r_al_pvc": ("Al", "pvc"),
    "r_al_al": ("Al", "aluminum"),
    "r_al_steel": ("Al", "steel"),
}


@cache
def table9() -> MappingProxyType[str, Table9Row]:
    """NFPA 70 Chapter 9 Table 9 by size, with 700/800/900 kcmil interpolated (see the data note)."""
    data = load("chapter9_table9")
    cols: list[str] = data["columns"]
    rows: dict[str, Table9Row] = {}
    for size, values in data["rows"].items():
        v = dict(zip(cols, values, strict=True))
        r = {key: v[name] for name, key in _T9_R_COLUMNS.items()}
        rows[size] = Table9Row(size, float(v["xl_pvc_al"]), float(v["xl_steel"]), MappingProxyType(r))
    # Table 9 skips 700, 800 and 900 kcmil.  Resistance is inversely proportional to the
    # area, so interpolate R linearly in 1/area and X (which changes little) linearly in area.
    for size, (lo, hi) in {"700": ("600", "750"), "800": ("750", "1000"), "900": ("750", "1000")}.items():
        a, b = rows[lo], rows[hi]
        ka, kb, k = float(lo), float(hi), float(size)
        t_area = (k - ka) / (kb - ka)
        t_inv = (1 / k - 1 / ka) / (1 / kb - 1 / ka)
        r = {}
        for key in _T9_R_COLUMNS.values():
            ra, rb = a.r[key], b.r[key]
            r[key] = None if ra is None or rb is None else ra + (rb - ra) * t_inv
        rows[size] = Table9Row(
            size,
            a.xl_pvc_al + (b.xl_pvc_al - a.xl_pvc_al) * t_area,
            a.xl_steel + (b.xl_steel - a.xl_steel) * t_area,
            MappingProxyType(r),
            interpolated=True,
        )
    return MappingProxyType({s: rows[s] for s in CONDUCTOR_SIZES if s in rows})


# --- Article 220 demand and lighting unit loads -----------------------------------------


Tiers = tuple[tuple[float | None, float], ...]  # (cumulative upper bound VA or None, factor)


def _tiers(raw: list[list[Any]]) -> Tiers:
    return tuple((None if bound is None else float(bound), float(f)) for bound, f in raw)


@cache
def demand_citation(rule: str, code: Any) -> str:
    """Edition-correct section/table of an Article 220 rule (lighting, receptacle, kitchen, ...)."""
    return load("demand_factors")[rule]["citation"][_edition(code)]


@cache
def lighting_demand_tiers(occupancy: Any) -> tuple[str, Tiers]:
    """Lighting demand table row for an occupancy: (row name, tiers); 'All others' = 100 %."""
    data = load("demand_factors")["lighting"]
    row = data["tiers_by_occupancy"].get(_edition(occupancy), data["all_others"])
    return row["row"], _tiers(row["tiers"])


@cache
def receptacle_tiers() -> Tiers:
    return _tiers(load("demand_factors")["receptacle"]["tiers"])


def kitchen_factor(units: int) -> float:
    """Table 220.56 demand factor for a number of kitchen equipment units (0 units → 1.0)."""
    data = load("demand_factors")["kitchen"]
    if units <= 0:
        return 1.0
    for n, factor in data["by_units"]:
        if units == n:
            return float(factor)
    return float(data["six_and_over"])


def largest_motor_factor() -> float:
    return float(load("demand_factors")["largest_motor"]["factor"])


def lighting_unit_load(occupancy: Any, code: Any) -> tuple[str, float]:
    """(table row, VA/ft²) of the general lighting unit load for an occupancy and edition."""
    row = load("lighting_unit_loads")[_edition(code)][_edition(occupancy)]
    return row["row"], float(row["va_per_ft2"])


def lighting_unit_load_citation(occupancy: Any, code: Any) -> str:
    data = load("lighting_unit_loads")
    key = "dwelling_citation" if _edition(occupancy) == "dwelling" else "citation"
    return data[key][_edition(code)]


# --- transformers --------------------------------------------------------------------------


@cache
def transformer_kva_ratings(three_phase: bool) -> tuple[float, ...]:
    data = load("transformer_kva")
    return tuple(float(k) for k in data["three_phase_kva" if three_phase else "single_phase_kva"])


def transformer_protection_table() -> dict[str, Any]:
    return load("transformer_450_3b")


@cache
def k_factor_ratings() -> tuple[int, ...]:
    return tuple(int(k) for k in load("k_factor")["standard_ratings"])


def k_factor_threshold() -> float:
    return float(load("k_factor")["suggest_above"])
