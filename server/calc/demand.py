"""NEC Article 220 demand (feeder and service calculated load) of one node of the tree.

The engine hands this module the connected VA by load category of everything a panel,
transformer or source feeds; :func:`apply_demand` returns the calculated load, one
:class:`~server.calc.results.CategoryDemand` step per category with the edition-correct
section number and plain-words note.  The 125 % factor for continuous loads belongs to
the design current (215.2(A)(1)), never to the demand load: this module only returns the
continuous part after demand factors so the engine can apply it.

Rules (NFPA 70 Article 220 Part III; section numbers per edition in
``tables/demand_factors.json``, entered from memory):

* lighting: the occupancy's row of the lighting demand table (Table 220.42 in 2017/2020,
  Table 220.45 in 2023): dwelling, hospital, hotel/motel, warehouse; all others 100 %;
* receptacles: first 10 kVA at 100 %, remainder at 50 % (220.44 in 2017/2020, 220.47 in
  2023); in a dwelling occupancy general-use receptacles are part of the general lighting
  load (220.14(J) / 220.41) and share the lighting table's factors instead;
* kitchen: Table 220.56 by number of units, never below the two largest units;
* heating and cooling are noncoincident (220.60): the larger is kept, the smaller dropped
  entirely (a tie keeps cooling, which may then count as the largest motor);
* 25 % of the largest motor (220.50, 430.24) among motor circuits and KEPT cooling;
* everything else (motor, EV charging, equipment, spare) at 100 %.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from functools import cache

from . import tables
from .model import Category, CodeEdition, Occupancy
from .results import CategoryDemand

LARGEST_MOTOR_STEP = "largest_motor"
#: Category key of an existing load taken from metered data (NEC 220.87): already the maximum
#: demand × 125 %, so it counts at 100 % and never in a demand tier of its own kind.
METERED_EXISTING = "metered_existing"

# Category values as plain strings, read once: apply_demand runs at every node of every recompute.
_CATEGORY_ORDER = tuple(c.value for c in Category)
_LIGHTING = Category.LIGHTING.value
_RECEPTACLE = Category.RECEPTACLE.value
_KITCHEN = Category.KITCHEN.value
_HEATING = Category.HEATING.value
_COOLING = Category.COOLING.value
_MOTOR = Category.MOTOR.value


@dataclass(frozen=True)
class DemandInput:
    connected_by_category: Mapping[str, float]  # VA per Category value, counted loads of the whole subtree
    continuous_by_category: Mapping[str, float]  # continuous part of the above
    kitchen_units: int  # number of `kitchen` circuits (one circuit = one unit, Table 220.56)
    kitchen_two_largest_va: tuple[float, float]  # the two largest kitchen circuit VAs (0.0 if absent)
    largest_motor_va: float  # largest single `motor` circuit VA in the subtree
    largest_cooling_va: float  # largest single `cooling` circuit VA in the subtree


@dataclass(frozen=True)
class DemandResult:
    demand_va: float  # NEC Art. 220 calculated load incl. 25 % of largest motor; never the 125 % continuous factor
    continuous_demand_va: float  # continuous part after the demand factors (for 125 % in design current)
    largest_motor_va: float  # the motor the 25 % was taken on (motor or KEPT cooling)
    steps: tuple[CategoryDemand, ...]  # one per category present + the largest-motor step


def apply_tiers(va: float, tiers: tables.Tiers) -> float:
    """Apply cumulative demand tiers: each (upper bound, factor) covers the VA up to its bound."""
    remaining = max(va, 0.0)
    lower = 0.0
    total = 0.0
    for upper, factor in tiers:
        span = remaining if upper is None else min(remaining, upper - lower)
        if span <= 0:
            break
        total += span * factor
        remaining -= span
        if upper is not None:
            lower = upper
    return total


def _pct(f: float) -> str:
    return f"{f * 100:g} %"


@cache  # the tier tables are few and fixed
def _tier_words(tiers: tables.Tiers) -> str:
    parts = []
    lower = 0.0
    for upper, factor in tiers:
        if upper is None:
            parts.append(f"remainder at {_pct(factor)}" if parts else f"all at {_pct(factor)}")
        elif lower == 0.0:
            parts.append(f"first {upper:,.0f} VA at {_pct(factor)}")
        else:
            parts.append(f"{lower + 1:,.0f}–{upper:,.0f} VA at {_pct(factor)}")
        if upper is not None:
            lower = upper
    return ", ".join(parts)


@cache
def _rule(code: CodeEdition, key: str) -> str:
    return f"{code.value} {tables.demand_citation(key, code)}"


def apply_demand(inp: DemandInput, *, code: CodeEdition, occupancy: Occupancy) -> DemandResult:
    """NEC Article 220 calculated load of a node, in VA.

    demand_va = Σ category demand + 25 % × largest motor (motor circuits and kept cooling).
    continuous_demand_va = Σ continuous VA of a category × that category's demand factor.
    """
    code = CodeEdition(code)
    occupancy = Occupancy(occupancy)
    connected = {str(k): float(v) for k, v in inp.connected_by_category.items()}
    continuous = {str(k): float(v) for k, v in inp.continuous_by_category.items()}
    present = [c for c in _CATEGORY_ORDER if c in connected]
    present += sorted(k for k in connected if k not in present)  # unknown keys still count at 100 %

    steps: list[CategoryDemand] = []
    factors: dict[str, float] = {}

    def add(cat: str, conn: float, dem: float, rule: str, note: str) -> None:
        steps.append(CategoryDemand(category=cat, connected_va=conn, demand_va=dem, rule=rule, note=note))
        factors[cat] = dem / conn if conn else 1.0

    # Noncoincident heating and cooling (220.60).
    heating = connected.get(_HEATING, 0.0)
    cooling = connected.get(_COOLING, 0.0)
    dropped: str | None = None
    if heating > 0 and cooling > 0:
        dropped = _HEATING if cooling >= heating else _COOLING

    dwelling = occupancy == Occupancy.DWELLING
    lighting = connected.get(_LIGHTING, 0.0)
    receptacle = connected.get(_RECEPTACLE, 0.0)
    row, light_tiers = tables.lighting_demand_tiers(occupancy)
    edition = code.value

    for cat in present:
        conn = connected[cat]
        if cat == _LIGHTING or (cat == _RECEPTACLE and dwelling):
            base = lighting + receptacle if dwelling else lighting
            total = apply_tiers(base, light_tiers)
            dem = total * conn / base if base else 0.0
            note = f"{row}: {_tier_words(light_tiers)}"
            if dwelling and receptacle > 0:
                note += (
                    f"; applied to general lighting and general-use receptacles together "
                    f"({base:,.0f} VA → {total:,.0f} VA, {tables.demand_citation('dwelling_receptacles', code)})"
                )
            add(cat, conn, dem, _rule(code, "lighting"), note)
        elif cat == _RECEPTACLE:
            tiers = tables.receptacle_tiers()
            add(cat, conn, apply_tiers(conn, tiers), _rule(code, "receptacle"), _tier_words(tiers))
        elif cat == _KITCHEN:
            units = max(int(inp.kitchen_units), 0)
            factor = tables.kitchen_factor(units)
            floor = sum(inp.kitchen_two_largest_va)
            dem = conn * factor
            note = f"{units} unit{'s' if units != 1 else ''} at {_pct(factor)}"
            if floor > dem:
                dem = min(floor, conn)
                note += f"; raised to the two largest units ({floor:,.0f} VA)"
            add(cat, conn, dem, _rule(code, "kitchen"), note)
        elif cat == dropped:
            other = "cooling" if cat == _HEATING else "heating"
            add(
                cat,
                conn,
                0.0,
                _rule(code, "noncoincident"),
                f"omitted: noncoincident with the larger {other} load ({connected[other]:,.0f} VA)",
            )
        elif cat in (_HEATING, _COOLING) and dropped is not None:
            other = "cooling" if cat == _HEATING else "heating"
            add(
                cat,
                conn,
                conn,
                _rule(code, "noncoincident"),
                f"100 %; kept as the larger of heating and cooling ({other} omitted)",
            )
        elif cat == _MOTOR:
            add(cat, conn, conn, _rule(code, "motors"), "100 % of every motor (25 % of the largest added below)")
        elif cat == METERED_EXISTING:
            add(cat, conn, conn, f"{edition} 220.87", "existing load from metered maximum demand × 125 %, at 100 %")
        else:
            add(cat, conn, conn, f"{edition} Article 220", "100 %")

    # 25 % of the largest motor (220.50 → 430.24); a dropped cooling load is not a candidate.
    candidates = [max(float(inp.largest_motor_va), 0.0)]
    if dropped != _COOLING and cooling > 0:
        candidates.append(max(float(inp.largest_cooling_va), 0.0))
    largest = max(candidates)
    motor_factor = tables.largest_motor_factor()
    if largest > 0:
        add(
            LARGEST_MOTOR_STEP,
            largest,
            largest * motor_factor,
            _rule(code, "largest_motor"),
            f"{_pct(motor_factor)} of the largest motor ({largest:,.0f} VA) added",
        )

    demand = sum(s.demand_va for s in steps)
    cont = sum(continuous.get(cat, 0.0) * factors.get(cat, 1.0) for cat in present)
    return DemandResult(demand_va=demand, continuous_demand_va=cont, largest_motor_va=largest, steps=tuple(steps))


def lighting_unit_load_va_per_ft2(occupancy: Occupancy, code: CodeEdition) -> float:
    """General lighting unit load, VA/ft²: Table 220.12 (2017/2020) / Table 220.42(A) (2023).

    Dwelling units: 3 VA/ft² (Table 220.12 in 2017, 220.14(J) in 2020, 220.41 in 2023).
    ``other`` uses the office row (a choice of this program, documented in the data file).
    """
    return tables.lighting_unit_load(Occupancy(occupancy), CodeEdition(code))[1]


def estimate_lighting_va(area_ft2: float, occupancy: Occupancy, code: CodeEdition) -> float:
    """Minimum general lighting load, VA = area (ft²) × unit load (VA/ft²)."""
    if area_ft2 < 0:
        raise ValueError(f"area_ft2 must not be negative, got {area_ft2!r}")
    return area_ft2 * lighting_unit_load_va_per_ft2(occupancy, code)
