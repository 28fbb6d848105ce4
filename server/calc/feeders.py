"""Feeder sizing: overcurrent device, phase conductors, parallel sets, neutral, EGC, voltage drop.

Tables (NFPA 70; numbers per edition in ``tables/code_sections.json``, values from memory):

* 240.6(A) standard ampere ratings; 240.4(B) next size up (≤ 800 A), 240.4(C) (> 800 A),
  240.4(D) small conductors;
* Table 310.16 (Table 310.15(B)(16) in 2017) ampacities, corrected for ambient by
  Table 310.15(B)(1) (2020) / 310.15(B)(1)(1) (2023) / 310.15(B)(2)(a) (2017) and adjusted
  for more than three current-carrying conductors by Table 310.15(C)(1)
  (310.15(B)(3)(a) in 2017); the result is limited by the terminal column (110.14(C));
* parallel conductors 1/0 and larger (310.10(G); 310.10(H) in 2017), each set in its own
  raceway (common practice; so the adjustment counts one set's conductors);
* Table 250.122 equipment grounding conductor, increased in proportion to the phase
  conductors' circular mils when they are upsized for voltage drop (250.122(B)); in
  parallel runs a full-size EGC in each raceway (250.122(F)).  The increase is taken per
  raceway: EGC area × (chosen per-set phase area / per-set area the ampacity alone needed),
  never larger than the phase conductors (250.122(A)).

Design current (from the engine) already holds 125 % of the continuous load
(215.2(A)(1)); the conductor's ampacity after correction and adjustment must be at least
the design current (a conservative reading: 215.2(A)(1) lets the adjusted ampacity be
compared with the load without the 125 %).

Search: the checks of a size only get easier as the size grows at a fixed number of sets
(Table 310.16 never decreases down a column, 240.4(D) and the parallel minimum only reject
small sizes, the next-size-up rule only looks at the ampacity), so the smallest fitting
size of each number of sets is found by bisection, and the words of a rejection are built
only for the size that is reported.  The result is the one a size-by-size scan would give.
"""

from __future__ import annotations

from bisect import bisect_left
from collections.abc import Iterator
from dataclasses import dataclass
from functools import lru_cache

from . import tables
from .errors import SizingError
from .model import CodeEdition, Conduit, Feeder, Material
from .results import CalcWarning, FeederResult, Severity, WarningCode
from .systems import SystemKind, SystemSpec
from .voltage_drop import voltage_drop_pct

MAX_SETS = 20  # the project file allows at most 20 parallel sets
MIN_PARALLEL_SIZE = "1/0"
_EPS = 1e-9
_SIZES = tables.conductor_sizes()
_FIRST_PARALLEL = tables.size_index(MIN_PARALLEL_SIZE)


def standard_ocpd_at_least(amps: float) -> int:
    """NEC 240.6(A): the smallest standard ampere rating ≥ ``amps``.

    Raises SizingError above the largest standard rating (6000 A).
    """
    ratings = tables.standard_ocpd_ratings()
    if amps - _EPS <= ratings[-1]:  # (written this way round so that NaN is refused too)
        return ratings[bisect_left(ratings, amps - _EPS)]  # first rating ≥ amps − ε (ascending)
    raise SizingError(f"{amps:,.1f} A is above the largest standard rating of NEC 240.6(A) ({ratings[-1]} A)")


def conductor_ampacity(size: str, material: Material | str, column_c: int) -> float:
    """NFPA 70 Table 310.16 ampacity (30 °C ambient, ≤ 3 current-carrying conductors), A."""
    amps = tables.ampacity_a(size, Material(material), column_c)
    if amps is None:
        raise ValueError(f"NFPA 70 Table 310.16 has no {Material(material).value} row for size {size!r}")
    return amps


@lru_cache(maxsize=1024)  # few distinct (ambient, column, edition) in a project; once per feeder otherwise
def correction_factor(ambient_c: float, column_c: int, code: CodeEdition | str) -> float:
    """Ambient temperature correction factor (30 °C basis) of the ``column_c`` column.

    Table 310.15(B)(1) (2020), 310.15(B)(1)(1) (2023), 310.15(B)(2)(a) (2017).  The table
    rows are whole degrees; an ambient between rows takes the hotter row (conservative).
    Returns 0.0 where the column may not be used at that ambient (a dash in the table, or
    hotter than the last row).
    """
    if column_c not in tables.TEMPERATURE_COLUMNS_C:
        raise ValueError(f"temperature column must be 60, 75 or 90 °C, not {column_c!r}")
    CodeEdition(code)  # the factors are the same in the three editions; only the number differs
    col = tables.TEMPERATURE_COLUMNS_C.index(column_c)
    for row in tables.ambient_rows():
        if ambient_c <= row.max_c + _EPS:
            factor = row.factors[col]
            return 0.0 if factor is None else float(factor)
    return 0.0


@lru_cache(maxsize=256)
def adjustment_factor(current_carrying: int, code: CodeEdition | str) -> float:
    """Adjustment factor for more than three current-carrying conductors in a raceway or cable.

    Table 310.15(C)(1) (2020/2023), Table 310.15(B)(3)(a) (2017): 4–6 80 %, 7–9 70 %,
    10–20 50 %, 21–30 45 %, 31–40 40 %, 41 and above 35 %.
    """
    CodeEdition(code)
    n = max(int(current_carrying), 1)
    for row in tables.adjustment_rows():
        if n >= row.min_count and (row.max_count is None or n <= row.max_count):
            return row.factor
    raise ValueError(f"no adjustment row for {current_carrying!r} conductors")  # pragma: no cover - table is complete


@lru_cache(maxsize=1024)
def egc_size(ocpd_amps: float, material: Material | str) -> str:
    """NFPA 70 Table 250.122 minimum equipment grounding conductor for an OCPD rating.

    Raises SizingError above the last row (6000 A).
    """
    key = Material(material).value
    for max_a, cu, al in tables.egc_rows():
        if ocpd_amps <= max_a + _EPS:
            return cu if key == "Cu" else al
    raise SizingError(f"{ocpd_amps:,.0f} A is above the last row of NEC Table 250.122")


def current_carrying_conductors(system: SystemSpec, harmonic_dominant: bool) -> int:
    """Current-carrying conductors of one set (310.15(E); 310.15(B)(5) in 2017).

    Three-phase: 3, plus the neutral of a 4-wire wye or high-leg system when the major part
    of the load is nonlinear (harmonic neutral current).  Single-phase 2-wire: 2 (both
    conductors carry the load current).  120/240 V split-phase: 2 (the neutral carries only
    the unbalance; identical nonlinear loads on the two legs cancel in it).
    """
    if system.kind == SystemKind.SINGLE:
        return 2
    if system.kind == SystemKind.SPLIT:
        return 2
    if system.kind in (SystemKind.WYE, SystemKind.HIGH_LEG) and harmonic_dominant:
        return 4
    return 3


def _size_for_cmil(cmil: float) -> str:
    """Smallest conductor size with at least ``cmil`` circular mils (largest size if none)."""
    for size in tables.conductor_sizes():
        if tables.circular_mils(size) >= cmil - _EPS:
            return size
    return tables.conductor_sizes()[-1]


@dataclass(frozen=True)
class FeederDesign:
    result: FeederResult
    warnings: tuple[CalcWarning, ...]


@dataclass(frozen=True)
class _Rating:
    per_set_a: float
    total_a: float
    ok: bool
    problems: tuple[str, ...]


@lru_cache(maxsize=256)
def _per_set_ampacities(
    material: str, column_c: int, terminal_c: int, corr: float, adj: float
) -> tuple[float | None, ...]:
    """Ampacity of one set of each size of :func:`tables.conductor_sizes` (None without a row), A.

    min(column ampacity × ambient correction × adjustment, terminal-column ampacity), the
    arithmetic of :meth:`_Sizer.rate`.  The bisection of :meth:`_Sizer.first_fit` needs it
    never to decrease with size, which is checked here once per table column.
    """
    out: list[float | None] = []
    for a_ins, a_term in zip(
        tables.ampacity_column(material, column_c), tables.ampacity_column(material, terminal_c), strict=True
    ):
        out.append(None if a_ins is None or a_term is None else min(a_ins * corr * adj, a_term))
    rows = [a for a in out if a is not None]
    if rows != sorted(rows):
        raise ValueError(f"Table 310.16 data: the {material} ampacities must not decrease with size")
    return tuple(out)


class _Sizer:
    """The ampacity and protection checks of one feeder (shared by search and given-size check)."""

    def __init__(self, *, feeder: Feeder, ccc: int, design_amps: float, ocpd: int, code: CodeEdition) -> None:
        self.material = Material(feeder.material)
        self.column = int(feeder.insulation_c)
        self.terminal = int(feeder.terminal_c)
        self.corr = correction_factor(feeder.ambient_c, self.column, code)
        self.adj = adjustment_factor(ccc, code)
        self.design = design_amps
        self.ocpd = ocpd
        self.code = code
        self.per_set = _per_set_ampacities(self.material.value, self.column, self.terminal, self.corr, self.adj)

    def has_row(self, size: str) -> bool:
        return tables.ampacity_a(size, self.material, self.column) is not None

    def rate(self, size: str, sets: int) -> _Rating:
        a_ins = tables.ampacity_a(size, self.material, self.column)
        a_term = tables.ampacity_a(size, self.material, self.terminal)
        if a_ins is None or a_term is None:
            msg = f"NFPA 70 {tables.section('ampacity_table', self.code)} has no {self.material.value} row for {size}"
            return _Rating(0.0, 0.0, False, (msg,))
        per_set = min(a_ins * self.corr * self.adj, a_term)
        total = per_set * sets
        problems = []
        if total < self.design - _EPS:
            problems.append(f"ampacity {total:.0f} A is below the design current {self.design:.1f} A")
        limit = tables.small_conductor_max_ocpd_a(size, self.material)
        if limit is not None and self.ocpd > limit:
            problems.append(
                f"{size} {self.material.value} may not be protected above {limit} A "
                f"({tables.section('small_conductors', self.code)}), OCPD is {self.ocpd} A"
            )
        if total < self.ocpd - _EPS:
            if self.ocpd > 800:
                problems.append(
                    f"ampacity {total:.0f} A is below the {self.ocpd} A OCPD "
                    f"(above 800 A no next size up, {tables.section('over_800', self.code)})"
                )
            else:
                try:
                    next_up = standard_ocpd_at_least(total)
                except SizingError:  # pragma: no cover - total < ocpd ≤ 800 here
                    next_up = self.ocpd
                if next_up < self.ocpd:
                    problems.append(
                        f"ampacity {total:.0f} A is not protected by the {self.ocpd} A OCPD "
                        f"(next size up would be {next_up} A, {tables.section('next_size_up', self.code)})"
                    )
        if sets > 1 and tables.size_index(size) < tables.size_index(MIN_PARALLEL_SIZE):
            problems.append(
                f"parallel conductors must be {MIN_PARALLEL_SIZE} or larger ({tables.section('parallel', self.code)})"
            )
        return _Rating(per_set, total, not problems, tuple(problems))

    def fits(self, index: int, sets: int) -> bool:
        """``rate(size, sets).ok`` for the size at ``index`` of :func:`tables.conductor_sizes`,
        without building any message: the same checks in the same arithmetic (a unit test
        compares the two over every size)."""
        per_set = self.per_set[index]
        if per_set is None:
            return False
        total = per_set * sets
        if total < self.design - _EPS:
            return False
        limit = tables.small_conductor_max_ocpd_a(_SIZES[index], self.material)
        if limit is not None and self.ocpd > limit:
            return False
        if total < self.ocpd - _EPS and (self.ocpd > 800 or standard_ocpd_at_least(total) < self.ocpd):
            return False
        return sets == 1 or index >= _FIRST_PARALLEL

    def first_fit(self, indexes: tuple[int, ...], sets: int) -> int | None:
        """The smallest size index of ``indexes`` (ascending) that fits with ``sets`` sets, or None.

        :meth:`fits` never turns false as the size grows (module docstring), so bisect.
        """
        if not indexes or not self.fits(indexes[-1], sets):
            return None
        return indexes[bisect_left(indexes, True, key=lambda i: self.fits(i, sets))]

    def words(self, size: str, sets: int, rating: _Rating) -> str:
        a_ins = tables.ampacity_a(size, self.material, self.column) or 0.0
        a_term = tables.ampacity_a(size, self.material, self.terminal) or 0.0
        sets_txt = f"{sets} × " if sets > 1 else ""
        text = (
            f"{sets_txt}{size} {self.material.value}: {a_ins:g} A at {self.column} °C "
            f"({tables.section('ampacity_table', self.code)}) × {self.corr:.2f} ambient "
            f"({tables.section('ambient_correction', self.code)}) × {self.adj:.2f} adjustment "
            f"({tables.section('adjustment', self.code)})"
        )
        if a_ins * self.corr * self.adj > a_term + _EPS:
            text += (
                f", limited to {a_term:g} A by {self.terminal} °C terminals ({tables.section('terminals', self.code)})"
            )
        return text + f" = {rating.total_a:.0f} A for {self.design:.1f} A design, {self.ocpd} A OCPD"


def _candidates(fixed_sets: int | None, max_parallel_size: str) -> Iterator[tuple[int, str]]:
    """(sets, size) in the order they are tried: fewer sets first, then smaller sizes."""
    sizes = tables.conductor_sizes()
    top = tables.size_index(max_parallel_size)
    first_parallel = tables.size_index(MIN_PARALLEL_SIZE)
    if fixed_sets is not None:
        lo = first_parallel if fixed_sets > 1 else 0
        for size in sizes[lo:]:
            yield fixed_sets, size
        return
    for size in sizes[: top + 1]:
        yield 1, size
    for sets in range(2, MAX_SETS + 1):
        for size in sizes[first_parallel : top + 1]:
            yield sets, size


@lru_cache(maxsize=64)
def _candidate_groups(
    fixed_sets: int | None, max_parallel_size: str, material: str, column_c: int
) -> tuple[tuple[int, tuple[int, ...]], ...]:
    """:func:`_candidates` with a Table 310.16 row in ``material`` and ``column_c``, grouped by
    number of sets: ((sets, ascending size indexes), ...) in the order they are tried."""
    groups: dict[int, list[int]] = {}
    for sets, size in _candidates(fixed_sets, max_parallel_size):
        if tables.ampacity_a(size, material, column_c) is not None:
            groups.setdefault(sets, []).append(tables.size_index(size))
    return tuple((sets, tuple(indexes)) for sets, indexes in groups.items())


def design_feeder(
    *,
    tag: str,
    feeder: Feeder,
    system: SystemSpec,
    design_amps: float,
    load_amps: float,
    pf: float,
    neutral_amps: float | None,
    harmonic_dominant: bool,
    breaker_amps: int | None,
    vd_limit_pct: float,
    upstream_vd_pct: float,
    vd_total_limit_pct: float,
    code: CodeEdition,
    max_parallel_size: str = "500",
    has_neutral: bool | None = None,
) -> FeederDesign:
    """Choose (or check) the feeder of ``tag``; see the module docstring for the rules.

    OCPD: ``breaker_amps`` (the feeding breaker) if given, else ``feeder.ocpd_amps``, else the
    standard rating ≥ design_amps (240.6(A)).  Conductor: the given size (checked, never
    replaced) or the smallest (sets, size) whose ampacity covers the design current and is
    protected by the OCPD, then upsized until the voltage drop at ``load_amps`` and ``pf``
    is within ``vd_limit_pct``.  ``has_neutral`` overrides ``system.has_neutral`` (e.g. False for
    the two line conductors feeding a single-phase transformer connected line to line).  Never raises for a size it cannot find: it reports
    ``no-standard-size`` instead.
    """
    code = CodeEdition(code)
    warnings: list[CalcWarning] = []
    material = Material(feeder.material)
    pf_used = min(max(float(pf), 0.0), 1.0)

    def warn(wcode: WarningCode, message: str, severity: Severity = Severity.WARNING) -> None:
        warnings.append(CalcWarning(code=wcode, message=message, tag=tag, severity=severity))

    if system.medium_voltage:
        warn(
            WarningCode.FEEDER_AMPACITY,
            f"feeder at {system.nominal_v_ll():g} V sized from {tables.section('ampacity_table', code)}, "
            "which covers conductors rated up to 2000 V; check medium-voltage cable ampacity separately",
            Severity.NOTE,
        )

    # Overcurrent device.
    if breaker_amps:
        ocpd = int(breaker_amps)
        ocpd_from = "feeding breaker"
    elif feeder.ocpd_amps:
        ocpd = int(feeder.ocpd_amps)
        ocpd_from = "given"
    else:
        ocpd_from = f"next standard rating ≥ design current ({tables.section('standard_ratings', code)})"
        try:
            ocpd = standard_ocpd_at_least(design_amps)
        except SizingError as exc:
            ocpd = tables.standard_ocpd_ratings()[-1]
            warn(WarningCode.NO_SIZE, f"no standard overcurrent device: {exc}", Severity.ERROR)
    if ocpd_from in ("feeding breaker", "given") and ocpd < design_amps - _EPS:
        warn(
            WarningCode.FEEDER_OCPD,
            f"{ocpd_from} OCPD {ocpd} A is below the design current {design_amps:.1f} A "
            f"(continuous load at 125 %, {tables.section('feeder_ampacity', code)})",
            Severity.ERROR,
        )

    ccc = current_carrying_conductors(system, harmonic_dominant)
    sizer = _Sizer(feeder=feeder, ccc=ccc, design_amps=design_amps, ocpd=ocpd, code=code)
    length = max(float(feeder.length_ft), 0.0)

    def vd_of(size: str, sets: int) -> float | None:
        if length == 0.0 or load_amps == 0.0:
            return 0.0
        if tables.table9().get(size) is None or tables.table9()[size].resistance(material, feeder.conduit) is None:
            return None
        return voltage_drop_pct(
            current_a=load_amps,
            length_ft=length,
            size=size,
            material=material,
            conduit=feeder.conduit,
            sets=sets,
            pf=pf_used,
            system=system,
        )

    reasons: list[str] = []
    size_given = feeder.size is not None
    min_size: str | None = None
    if size_given:
        size = str(feeder.size)
        sets = feeder.sets or 1
        rating = sizer.rate(size, sets)
        reasons.append("size given: " + sizer.words(size, sets, rating))
        if not rating.ok:
            warn(
                WarningCode.CONDUCTOR_TOO_SMALL,
                f"given conductor {sets} × {size} {material.value} is too small: " + "; ".join(rating.problems),
                Severity.ERROR,
            )
        vd = vd_of(size, sets)
    else:
        groups = _candidate_groups(feeder.sets, max_parallel_size, material.value, sizer.column)
        chosen: tuple[int, str, _Rating] | None = None
        for sets_c, indexes in groups:
            first = sizer.first_fit(indexes, sets_c)
            if first is not None:
                chosen = (sets_c, _SIZES[first], sizer.rate(_SIZES[first], sets_c))
                break
        if chosen is None:
            if not groups:  # pragma: no cover - every material has rows
                raise SizingError(f"{tag}: no conductor size to try")
            # Report the last candidate tried (the largest size of the most sets), as a scan would.
            sets_c, indexes = groups[-1]
            chosen = (sets_c, _SIZES[indexes[-1]], sizer.rate(_SIZES[indexes[-1]], sets_c))
            warn(
                WarningCode.NO_SIZE,
                f"no conductor up to {MAX_SETS if feeder.sets is None else feeder.sets} set(s) of the allowed sizes "
                f"meets {design_amps:.1f} A with a {ocpd} A OCPD at {feeder.ambient_c:g} °C ambient: "
                + "; ".join(chosen[2].problems),
                Severity.ERROR,
            )
        sets, size, rating = chosen
        min_size = size
        reasons.append("ampacity: " + sizer.words(size, sets, rating))
        vd = vd_of(size, sets)
        if vd is not None and vd > vd_limit_pct + _EPS and rating.ok:
            # Step on from the chosen candidate, in order, to the first that fits and meets the limit.
            start = False
            upsized: tuple[int, str, _Rating, float] | None = None
            for sets_c, index in ((s, i) for s, indexes in groups for i in indexes):
                size_c = _SIZES[index]
                if (sets_c, size_c) == (sets, size):
                    start = True
                    continue
                if not start or not sizer.fits(index, sets_c):
                    continue
                vd_c = vd_of(size_c, sets_c)
                if vd_c is not None and vd_c <= vd_limit_pct + _EPS:
                    upsized = (sets_c, size_c, sizer.rate(size_c, sets_c), vd_c)
                    break
            if upsized is not None:
                reasons.append(
                    f"upsized from {sets} × {size} to {upsized[0]} × {upsized[1]} for voltage drop "
                    f"({vd:.2f} % > {vd_limit_pct:g} % limit)"
                )
                sets, size, rating, vd = upsized
            else:
                reasons.append(f"no larger size found that brings the voltage drop within {vd_limit_pct:g} %")

    # Voltage drop warnings.
    own_vd = 0.0 if vd is None else vd
    if vd is None:
        reasons.append(f"voltage drop not computed: no Chapter 9 Table 9 row for {size} {material.value}")
    else:
        reasons.append(f"voltage drop {own_vd:.2f} % at {load_amps:.1f} A, PF {pf_used:.2f}, {length:g} ft")
    cumulative = upstream_vd_pct + own_vd
    if own_vd > vd_limit_pct + _EPS:
        warn(
            WarningCode.VOLTAGE_DROP_FEEDER,
            f"feeder voltage drop {own_vd:.2f} % exceeds {vd_limit_pct:g} % "
            f"({tables.section('feeder_vd_note', code)} recommendation)",
        )
    if cumulative > vd_total_limit_pct + _EPS:
        warn(
            WarningCode.VOLTAGE_DROP_TOTAL,
            f"voltage drop from the source {cumulative:.2f} % exceeds {vd_total_limit_pct:g} % "
            f"(upstream {upstream_vd_pct:.2f} % + this feeder {own_vd:.2f} %)",
        )

    # Equipment grounding conductor (Table 250.122, 250.122(B), 250.122(F)).
    try:
        base_egc = egc_size(ocpd, material)
    except SizingError as exc:
        base_egc = tables.egc_rows()[-1][1 if material == Material.CU else 2]
        warn(WarningCode.NO_SIZE, f"equipment grounding conductor: {exc}", Severity.ERROR)
    required_egc = base_egc
    egc_note = f"EGC {base_egc} per {tables.section('egc', code)} for {ocpd} A"
    if min_size is not None and min_size != size and tables.circular_mils(size) > tables.circular_mils(min_size):
        ratio = tables.circular_mils(size) / tables.circular_mils(min_size)
        required_egc = _size_for_cmil(tables.circular_mils(base_egc) * ratio)
        egc_note += (
            f", increased to {required_egc} in proportion to the phase conductors "
            f"({ratio:.2f} × circular mils, {tables.section('egc_increase', code)})"
        )
    if tables.circular_mils(required_egc) > tables.circular_mils(size):
        required_egc = size  # 250.122(A): never required larger than the circuit conductors
    if sets > 1:
        egc_note += f"; one in each of the {sets} raceways ({tables.section('egc_parallel', code)})"
    egc = required_egc
    if feeder.egc is not None:
        egc = str(feeder.egc)
        if tables.circular_mils(egc) < tables.circular_mils(required_egc) - _EPS:
            warn(
                WarningCode.EGC_TOO_SMALL,
                f"given EGC {egc} {material.value} is smaller than the required {required_egc} ({egc_note})",
                Severity.ERROR,
            )
    reasons.append(egc_note)

    # Neutral.
    neutral: str | None = None
    if system.has_neutral if has_neutral is None else has_neutral:
        if feeder.neutral_size is not None:
            neutral = str(feeder.neutral_size)
            reasons.append(f"neutral {neutral} given")
        else:
            neutral = size
            if harmonic_dominant and ccc == 4:
                reasons.append(
                    f"neutral full size: it carries harmonic current and counts as current-carrying "
                    f"({tables.section('harmonic_neutral', code)})"
                )
            else:
                reasons.append("neutral same size as the phase conductors; a reduced neutral is the engineer's call")
        if neutral_amps is not None:
            n_rating = sizer.rate(neutral, sets) if sizer.has_row(neutral) else None
            n_amp = 0.0 if n_rating is None else n_rating.total_a
            if neutral_amps > n_amp + _EPS:
                warn(
                    WarningCode.NEUTRAL_OVERLOAD,
                    f"neutral current {neutral_amps:.1f} A exceeds the ampacity of the {sets} × {neutral} "
                    f"{material.value} neutral ({n_amp:.0f} A)",
                    Severity.ERROR,
                )

    result = FeederResult(
        ocpd_amps=ocpd,
        conductor=size,
        material=material.value,
        sets=sets,
        egc=egc,
        neutral=neutral,
        ampacity_amps=rating.total_a,
        design_amps=design_amps,
        length_ft=length,
        conduit=Conduit(feeder.conduit).value,
        voltage_drop_pct=own_vd,
        cumulative_voltage_drop_pct=cumulative,
        size_given=size_given,
        current_carrying=ccc,
        reason="; ".join(reasons),
    )
    return FeederDesign(result=result, warnings=tuple(warnings))
