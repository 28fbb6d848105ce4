"""Feeder sizing: OCPD, conductor, derating, parallel sets, EGC, neutral and voltage-drop upsizing.

Sources: NFPA 70 (2017, 2020, 2023) 240.4, 240.6(A), Table 310.16 / 310.15(B)(16), the
ambient and adjustment tables, Table 250.122, 250.122(B), Chapter 9 Tables 8 and 9; all
values from memory (see the data files), arithmetic by hand in the comments.
"""

from __future__ import annotations

from dataclasses import replace

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from server.calc import feeders, tables
from server.calc.errors import SizingError
from server.calc.feeders import (
    FeederDesign,
    adjustment_factor,
    conductor_ampacity,
    correction_factor,
    current_carrying_conductors,
    design_feeder,
    egc_size,
    standard_ocpd_at_least,
)
from server.calc.model import CodeEdition, Conduit, Feeder, Material
from server.calc.results import Severity, WarningCode
from server.calc.systems import SYSTEMS
from tests.helpers import assert_close

NEC23 = CodeEdition.NEC_2023
WYE208 = SYSTEMS["208Y/120 3PH 4W"]
WYE480 = SYSTEMS["480Y/277 3PH 4W"]
DELTA480 = SYSTEMS["480 3PH 3W"]
SPLIT = SYSTEMS["120/240 1PH 3W"]


def _design(
    design_amps: float,
    feeder: Feeder | None = None,
    *,
    system=WYE208,
    load_amps: float | None = None,
    pf: float = 0.9,
    neutral_amps: float | None = None,
    harmonic: bool = False,
    breaker_amps: int | None = None,
    vd_limit: float = 3.0,
    upstream: float = 0.0,
    vd_total: float = 5.0,
    code: CodeEdition = NEC23,
    max_parallel_size: str = "500",
) -> FeederDesign:
    return design_feeder(
        tag="LP-1",
        feeder=feeder or Feeder(),
        system=system,
        design_amps=design_amps,
        load_amps=design_amps if load_amps is None else load_amps,
        pf=pf,
        neutral_amps=neutral_amps,
        harmonic_dominant=harmonic,
        breaker_amps=breaker_amps,
        vd_limit_pct=vd_limit,
        upstream_vd_pct=upstream,
        vd_total_limit_pct=vd_total,
        code=code,
        max_parallel_size=max_parallel_size,
    )


def _codes(design: FeederDesign) -> set[WarningCode]:
    return {w.code for w in design.warnings}


# --- building blocks ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("amps", "rating"),
    [(0.0, 15), (15.0, 15), (15.1, 20), (180.0, 200), (200.0, 200), (201.0, 225), (801.0, 1000), (5000.0, 5000)],
    ids=lambda v: f"NFPA70-2023-240.6(A)-{v}",
)
def test_standard_ocpd_next_size_up(amps: float, rating: int) -> None:
    assert standard_ocpd_at_least(amps) == rating


def test_standard_ocpd_beyond_table() -> None:
    with pytest.raises(SizingError, match="240.6"):
        standard_ocpd_at_least(6001.0)


def test_conductor_ampacity() -> None:
    # NFPA 70-2023 Table 310.16 (from memory): 3/0 Cu 75 °C = 200 A; 250 kcmil Al 90 °C = 230 A.
    assert conductor_ampacity("3/0", Material.CU, 75) == 200
    assert conductor_ampacity("250", "Al", 90) == 230
    with pytest.raises(ValueError, match="no Al row"):
        conductor_ampacity("14", "Al", 75)


@pytest.mark.parametrize(
    ("ambient", "column", "factor"),
    [
        (30.0, 75, 1.0),
        (40.0, 90, 0.91),
        (40.0, 75, 0.88),
        (40.0, 60, 0.82),
        (35.5, 90, 0.91),  # between rows → hotter row (program rule, conservative)
        (20.0, 75, 1.11),
        (50.0, 90, 0.82),
        (60.0, 60, 0.0),  # dash in the 60 °C column
        (86.0, 90, 0.0),  # beyond the table
    ],
    ids=lambda v: f"NFPA70-2023-T310.15(B)(1)(1)-{v}",
)
def test_correction_factor(ambient: float, column: int, factor: float) -> None:
    assert correction_factor(ambient, column, NEC23) == factor


@pytest.mark.parametrize(
    ("n", "factor"),
    [(1, 1.0), (3, 1.0), (4, 0.8), (6, 0.8), (7, 0.7), (9, 0.7), (10, 0.5), (20, 0.5), (21, 0.45), (30, 0.45)]
    + [(31, 0.4), (40, 0.4), (41, 0.35), (60, 0.35)],
    ids=lambda v: f"NFPA70-2023-T310.15(C)(1)-{v}",
)
def test_adjustment_factor(n: int, factor: float) -> None:
    for code in CodeEdition:  # same factors in 2017 Table 310.15(B)(3)(a)
        assert adjustment_factor(n, code) == factor


@pytest.mark.parametrize(
    ("ocpd", "material", "size"),
    [(15, "Cu", "14"), (20, "Cu", "12"), (60, "Cu", "10"), (61, "Cu", "8"), (200, "Cu", "6"), (225, "Cu", "4")]
    + [(200, "Al", "4"), (400, "Al", "1"), (1600, "Cu", "4/0")],
    ids=lambda v: f"NFPA70-2023-T250.122-{v}",
)
def test_egc_size(ocpd: int, material: str, size: str) -> None:
    assert egc_size(ocpd, material) == size


def test_egc_beyond_table() -> None:
    with pytest.raises(SizingError, match="250.122"):
        egc_size(6001, "Cu")


def test_current_carrying_counts() -> None:
    # NFPA 70-2023 310.15(E) (from memory): neutral of a 4-wire wye counts when the load is mainly nonlinear.
    assert current_carrying_conductors(WYE208, False) == 3
    assert current_carrying_conductors(WYE208, True) == 4
    assert current_carrying_conductors(DELTA480, True) == 3
    assert current_carrying_conductors(SPLIT, True) == 2
    assert current_carrying_conductors(SYSTEMS["120 1PH 2W"], False) == 2


# --- design_feeder ------------------------------------------------------------------------------------


def test_180a_design_gives_200a_and_3_0_cu() -> None:
    # NFPA 70-2023 240.6(A): 180 A → 200 A; Table 310.16 75 °C Cu: 2/0 = 175 A (too small), 3/0 = 200 A.
    d = _design(180.0)
    f = d.result
    assert (f.ocpd_amps, f.conductor, f.sets, f.material) == (200, "3/0", 1, "Cu")
    assert f.ampacity_amps == 200
    assert f.egc == "6"  # NFPA 70-2023 Table 250.122: 200 A → 6 AWG Cu
    assert f.neutral == "3/0"
    assert "Table 310.16" in f.reason
    assert d.warnings == ()


def test_2017_edition_cites_old_numbers() -> None:
    # NFPA 70-2017: Table 310.15(B)(16) and Table 310.15(B)(2)(a) (from memory).
    reason = _design(180.0, code=CodeEdition.NEC_2017).result.reason
    assert "Table 310.15(B)(16)" in reason and "Table 310.15(B)(2)(a)" in reason


def test_derating_four_conductors_and_40c_ambient() -> None:
    # 90 °C insulation, 75 °C terminals, 40 °C ambient, harmonic wye neutral → 4 current-carrying:
    # factor = 0.91 (T310.15(B)(1)(1), 90 °C column) × 0.80 (T310.15(C)(1), 4–6) = 0.728 (NFPA 70-2023, from memory)
    # 3/0: 225 × 0.728 = 163.8 A < 180 A;  4/0: 260 × 0.728 = 189.3 A ≥ 180 A, below the 230 A terminal limit,
    # and 200 A OCPD is the next size up of 189.3 A (240.4(B)).
    feeder = Feeder(insulation_c=90, ambient_c=40.0)
    d = _design(180.0, feeder, harmonic=True)
    f = d.result
    assert (f.conductor, f.ocpd_amps, f.current_carrying) == ("4/0", 200, 4)
    assert_close(f.ampacity_amps, 260 * 0.91 * 0.8)
    assert f.neutral == "4/0" and "310.15(E)(3)" in f.reason


def test_terminal_rating_limits_ampacity() -> None:
    # 90 °C insulation at 30 °C: 3/0 is 225 A at 90 °C but 75 °C terminals limit it to 200 A (110.14(C)).
    d = _design(190.0, Feeder(insulation_c=90))
    assert d.result.conductor == "3/0"
    assert d.result.ampacity_amps == 200
    assert "terminals" in d.result.reason


def test_60c_terminals() -> None:
    # 60 °C terminals (110.14(C)(1)(a)): 100 A design → 100 A OCPD; Cu 60 °C column: 2 AWG 95 A (next size
    # up 100 A, protected), but 95 A < 100 A design → 1 AWG (110 A).  NFPA 70-2023 Table 310.16, from memory.
    d = _design(100.0, Feeder(insulation_c=75, terminal_c=60))
    assert d.result.conductor == "1"


def test_feeding_breaker_sets_ocpd_and_conductor_is_protected() -> None:
    # Breaker 225 A feeds a 180 A design: 3/0 (200 A → next size 200 A < 225 A) is not protected → 4/0 (230 A).
    d = _design(180.0, breaker_amps=225)
    assert (d.result.ocpd_amps, d.result.conductor) == (225, "4/0")
    assert d.result.egc == "4"  # Table 250.122: 300 A row → 4 AWG Cu


def test_given_ocpd_below_design_warns() -> None:
    d = _design(180.0, Feeder(ocpd_amps=150))
    assert WarningCode.FEEDER_OCPD in _codes(d)
    msg = next(w.message for w in d.warnings if w.code == WarningCode.FEEDER_OCPD)
    assert "150 A" in msg and "180.0 A" in msg


def test_small_conductor_rule() -> None:
    # 240.4(D): 14 AWG Cu at most 15 A; with a 20 A breaker a 14 A load needs 12 AWG.
    assert _design(14.0, breaker_amps=20).result.conductor == "12"
    assert _design(14.0).result.conductor == "14"  # 15 A OCPD


def test_parallel_sets_above_max_size() -> None:
    # 700 A design → 700 A OCPD.  1 set is limited to 500 kcmil (380 A).  2 sets: 2 × 400 = 670 A < 700 A;
    # 2 × 500 = 760 A ≥ 700 A.  NFPA 70-2023 Table 310.16, 310.10(G), from memory.
    d = _design(700.0, system=WYE480)
    assert (d.result.sets, d.result.conductor, d.result.ocpd_amps) == (2, "500", 700)
    assert d.result.egc == "1/0"  # NFPA 70-2023 Table 250.122: 700 A falls in the 800 A row → 1/0 Cu, in each raceway
    assert "2 raceways" in d.result.reason


def test_parallel_with_smaller_max_size() -> None:
    # Max 350 kcmil per set: 2 × 350 = 620 A < 700 A → 3 sets: 3 × 4/0 = 690 A < 700 A; 3 × 250 = 765 A.
    d = _design(700.0, system=WYE480, max_parallel_size="350")
    assert (d.result.sets, d.result.conductor) == (3, "250")


def test_above_800a_no_next_size_up() -> None:
    # 1000 A design → 1000 A OCPD; above 800 A ampacity must reach the OCPD (240.4(C)):
    # 2 × 500 = 760 A; 3 × 350 = 930 A < 1000 A; 3 × 400 = 1005 A ≥ 1000 A.
    d = _design(1000.0, system=WYE480)
    assert (d.result.sets, d.result.conductor, d.result.ocpd_amps) == (3, "400", 1000)
    assert d.result.egc == "2/0"  # Table 250.122: 1000 A → 2/0 Cu


def test_given_sets_parallel_minimum_size() -> None:
    # Given 2 sets: sizes start at 1/0 (310.10(G)); 150 A design → 2 × 1/0 = 300 A.
    d = _design(150.0, Feeder(sets=2))
    assert (d.result.sets, d.result.conductor) == (2, "1/0")


def test_voltage_drop_upsizing_and_proportional_egc() -> None:
    # 208 V, 100 A design/OCPD, 80 A load, PF 0.9, 300 ft Cu in steel (NFPA 70-2023 Ch. 9 Table 9, from memory):
    #   3 AWG (ampacity minimum, 100 A): Ze = 0.25·0.9 + 0.059·0.4359 = 0.2507 → VD = √3·80·0.2507·0.3 = 10.42 V = 5.01 %
    #   2 AWG: Ze = 0.20·0.9 + 0.057·0.4359 = 0.2048 → 4.09 %;  1 AWG: 0.1688 → 3.37 %;
    #   1/0:  Ze = 0.12·0.9 + 0.055·0.4359 = 0.1320 → 2.64 % ≤ 3 %  → 1/0.
    # EGC (Table 250.122, 100 A) 8 AWG = 16,510 cmil × (105,600 / 52,620 = 2.007) = 33,133 cmil → 4 AWG
    # (6 AWG = 26,240 < 33,133 ≤ 41,740), per 250.122(B).
    d = _design(100.0, Feeder(length_ft=300.0, conduit=Conduit.STEEL), load_amps=80.0, pf=0.9)
    f = d.result
    assert f.conductor == "1/0"
    assert_close(f.voltage_drop_pct, 2.64, rel=3e-3)
    assert f.egc == "4"
    assert "250.122(B)" in f.reason and "upsized from 1 × 3 to 1 × 1/0" in f.reason
    assert WarningCode.VOLTAGE_DROP_FEEDER not in _codes(d)


def test_egc_increase_2017_same_rule() -> None:
    d = _design(100.0, Feeder(length_ft=300.0, conduit=Conduit.STEEL), load_amps=80.0, code=CodeEdition.NEC_2017)
    assert d.result.egc == "4"


def test_given_size_too_small_warns_and_is_kept() -> None:
    d = _design(180.0, Feeder(size="1/0"))
    f = d.result
    assert f.conductor == "1/0" and f.size_given
    warning = next(w for w in d.warnings if w.code == WarningCode.CONDUCTOR_TOO_SMALL)
    assert warning.severity == Severity.ERROR
    assert "150 A is below the design current 180.0 A" in warning.message
    assert warning.tag == "LP-1"


def test_given_size_unprotected_warns() -> None:
    # 3/0 (200 A) under a 225 A breaker: next size up of 200 A is 200 A < 225 A (240.4(B)).
    d = _design(150.0, Feeder(size="3/0"), breaker_amps=225)
    msg = next(w.message for w in d.warnings if w.code == WarningCode.CONDUCTOR_TOO_SMALL)
    assert "225 A OCPD" in msg and "240.4(B)" in msg


def test_given_size_long_run_warns_voltage_drop_and_not_upsized() -> None:
    d = _design(100.0, Feeder(size="3", length_ft=300.0), load_amps=80.0)
    assert d.result.conductor == "3"
    assert WarningCode.VOLTAGE_DROP_FEEDER in _codes(d)
    assert WarningCode.CONDUCTOR_TOO_SMALL not in _codes(d)


def test_cumulative_voltage_drop_warns_total() -> None:
    # Upstream 4 % + this feeder ≈ 1.2 % > 5 % total (NEC 215.2(A)(2) Informational Note No. 2 recommendation).
    d = _design(180.0, Feeder(length_ft=100.0), load_amps=150.0, upstream=4.0)
    f = d.result
    assert_close(f.cumulative_voltage_drop_pct, 4.0 + f.voltage_drop_pct)
    assert WarningCode.VOLTAGE_DROP_TOTAL in _codes(d)
    assert WarningCode.VOLTAGE_DROP_FEEDER not in _codes(d)


def test_given_egc_too_small_warns() -> None:
    d = _design(180.0, Feeder(egc="10"))
    assert d.result.egc == "10"
    assert WarningCode.EGC_TOO_SMALL in _codes(d)


def test_neutral_rules() -> None:
    assert _design(100.0, system=DELTA480).result.neutral is None
    d = _design(100.0, Feeder(neutral_size="8"), neutral_amps=90.0)
    assert d.result.neutral == "8"
    assert WarningCode.NEUTRAL_OVERLOAD in _codes(d)  # 8 AWG Cu 50 A < 90 A


def test_has_neutral_override() -> None:
    # A single-phase transformer primary connected line to line has two line conductors and no neutral.
    line_to_line = SYSTEMS["277 1PH 2W"]
    assert _design(30.0, system=line_to_line).result.neutral == "10"
    d = design_feeder(
        tag="T-3",
        feeder=Feeder(),
        system=line_to_line,
        design_amps=30.0,
        load_amps=30.0,
        pf=1.0,
        neutral_amps=None,
        harmonic_dominant=False,
        breaker_amps=None,
        vd_limit_pct=3.0,
        upstream_vd_pct=0.0,
        vd_total_limit_pct=5.0,
        code=NEC23,
        has_neutral=False,
    )
    assert d.result.neutral is None and d.result.conductor == "10"


def test_split_phase_two_current_carrying() -> None:
    d = _design(100.0, system=SPLIT, harmonic=True)
    assert d.result.current_carrying == 2


def test_aluminium_feeder() -> None:
    # NFPA 70-2023 Table 310.16 Al 75 °C: 4/0 = 180 A, 250 = 205 A; 200 A OCPD for 180 A → 4/0 Al
    # (180 A next size up 200 A).  Table 250.122: 200 A → 4 AWG Al.
    d = _design(180.0, Feeder(material=Material.AL))
    assert (d.result.conductor, d.result.egc, d.result.material) == ("4/0", "4", "Al")


def test_too_hot_reports_no_size_without_raising() -> None:
    # 60 °C insulation at 60 °C ambient: the 60 °C column has no factor (dash) → nothing fits.
    d = _design(50.0, Feeder(insulation_c=60, ambient_c=60.0))
    warning = next(w for w in d.warnings if w.code == WarningCode.NO_SIZE)
    assert warning.severity == Severity.ERROR and "60 °C ambient" in warning.message


def test_huge_design_current_reports_no_size() -> None:
    d = _design(7000.0, system=WYE480)
    assert WarningCode.NO_SIZE in _codes(d)
    assert d.result.ocpd_amps == 6000


def test_zero_length_zero_drop() -> None:
    d = _design(50.0)
    assert d.result.voltage_drop_pct == 0.0 and d.result.cumulative_voltage_drop_pct == 0.0


def test_medium_voltage_note() -> None:
    d = _design(20.0, system=SYSTEMS["4160 3PH 3W"])
    note = next(w for w in d.warnings if w.code == WarningCode.FEEDER_AMPACITY)
    assert note.severity == Severity.NOTE


# --- properties -------------------------------------------------------------------------------------


@settings(max_examples=150, deadline=None)
@given(
    a=st.floats(min_value=1.0, max_value=4000.0),
    b=st.floats(min_value=1.0, max_value=4000.0),
    material=st.sampled_from(list(Material)),
)
def test_larger_design_never_smaller(a: float, b: float, material: Material) -> None:
    # Monotonicity: a larger design current never gives a smaller OCPD or less ampacity.
    lo, hi = sorted((a, b))
    feeder = Feeder(material=material)
    f_lo = _design(lo, feeder, system=WYE480).result
    f_hi = _design(hi, feeder, system=WYE480).result
    assert f_lo.ocpd_amps <= f_hi.ocpd_amps
    assert f_lo.ampacity_amps <= f_hi.ampacity_amps + 1e-9
    if f_lo.sets == f_hi.sets:
        assert tables.size_index(f_lo.conductor) <= tables.size_index(f_hi.conductor)


@settings(max_examples=100, deadline=None)
@given(
    design=st.floats(min_value=1.0, max_value=3000.0),
    ambient=st.sampled_from([20.0, 30.0, 40.0, 50.0]),
    harmonic=st.booleans(),
)
def test_chosen_conductor_satisfies_rules(design: float, ambient: float, harmonic: bool) -> None:
    # Every chosen conductor carries the design current and is protected by its OCPD (240.4(B)/(C)).
    d = _design(design, Feeder(insulation_c=90, ambient_c=ambient), harmonic=harmonic, system=WYE480)
    f = d.result
    assert f.ampacity_amps >= design - 1e-9
    if f.ocpd_amps > 800:
        assert f.ampacity_amps >= f.ocpd_amps - 1e-9
    else:
        assert standard_ocpd_at_least(f.ampacity_amps) >= f.ocpd_amps
    assert not _codes(d) & {WarningCode.CONDUCTOR_TOO_SMALL, WarningCode.NO_SIZE}


def test_replace_keeps_feeder_frozen() -> None:
    # The input Feeder is never mutated (frozen dataclass); a changed copy gives a different design.
    feeder = Feeder()
    _design(180.0, feeder)
    assert feeder == Feeder()
    assert _design(180.0, replace(feeder, material=Material.AL)).result.material == "Al"


def test_given_single_set_too_large_load_reports_no_size() -> None:
    # One set forced: the largest size, 1000 kcmil Cu at 75 °C = 545 A (NFPA 70-2023 Table 310.16, from memory),
    # cannot carry 700 A → no-standard-size error, largest size reported, no exception.
    d = _design(700.0, Feeder(sets=1), system=WYE480)
    assert WarningCode.NO_SIZE in _codes(d)
    assert (d.result.sets, d.result.conductor) == (1, "1000")


# --- the fast search gives what a size-by-size scan gives (program rule, no table values) -------------

_SEARCH_SETTINGS = settings(max_examples=150, deadline=None)
_FEEDER_INPUTS = {
    "material": st.sampled_from(list(Material)),
    "column": st.sampled_from([60, 75, 90]),
    "terminal": st.sampled_from([60, 75]),
    "ambient": st.sampled_from([10.0, 30.0, 36.5, 45.0, 55.0, 68.0]),
    "harmonic": st.booleans(),
    "design": st.one_of(st.floats(min_value=0.0, max_value=9000.0), st.sampled_from([0.0, 15.0, 20.0, 200.0, 800.0])),
    "ocpd": st.one_of(st.none(), st.sampled_from(tables.standard_ocpd_ratings())),
    "fixed_sets": st.sampled_from([None, None, 1, 2, 3, 5]),
    "top": st.sampled_from(["500", "4/0", "1000"]),
}


@_SEARCH_SETTINGS
@given(**_FEEDER_INPUTS)
def test_fits_agrees_with_rate(material, column, terminal, ambient, harmonic, design, ocpd, fixed_sets, top) -> None:
    # _Sizer.fits (used by the search) must accept exactly the sizes whose full rating has no problem.
    feeder = Feeder(material=material, insulation_c=column, terminal_c=terminal, ambient_c=ambient)
    ccc = 4 if harmonic else 3
    sizer = feeders._Sizer(feeder=feeder, ccc=ccc, design_amps=design, ocpd=ocpd or 100, code=NEC23)
    for index, size in enumerate(tables.conductor_sizes()):
        for sets in (1, 2, 3, 4):
            expected = sizer.has_row(size) and sizer.rate(size, sets).ok
            assert sizer.fits(index, sets) == expected, (size, sets)


@_SEARCH_SETTINGS
@given(**_FEEDER_INPUTS)
def test_search_matches_size_by_size_scan(
    material, column, terminal, ambient, harmonic, design, ocpd, fixed_sets, top
) -> None:
    # The bisection picks the first (sets, size) in trial order that passes every check, or reports the
    # last one tried when none does: the same choice as trying every candidate in turn.
    feeder = Feeder(
        material=material, insulation_c=column, terminal_c=terminal, ambient_c=ambient, sets=fixed_sets, ocpd_amps=ocpd
    )
    d = _design(design, feeder, system=WYE480, harmonic=harmonic, max_parallel_size=top).result
    sizer = feeders._Sizer(feeder=feeder, ccc=d.current_carrying, design_amps=design, ocpd=d.ocpd_amps, code=NEC23)
    scanned = None
    for sets, size in feeders._candidates(fixed_sets, top):
        if sizer.has_row(size):
            scanned = (sets, size)
            if sizer.rate(size, sets).ok:
                break
    assert (d.sets, d.conductor) == scanned


def test_standard_ocpd_refuses_nan() -> None:
    with pytest.raises(SizingError):
        standard_ocpd_at_least(float("nan"))
