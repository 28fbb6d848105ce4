"""Published tables as data: spot values against the printed tables, and the file conventions.

Every value below names its source and edition in the test id.  Table values were entered
from memory (as the data files say) and are checked here against the same published tables
as recalled independently while writing the tests; they must be verified against the
printed editions before relying on them.
"""

from __future__ import annotations

import pytest

from server.calc import tables
from server.calc.model import CodeEdition, Conduit, Material, Occupancy

# --- file conventions ---------------------------------------------------------------------


@pytest.mark.parametrize("name", tables.data_files())
def test_every_data_file_cites_source_and_note(name: str) -> None:
    data = tables.load(name)
    assert data["source"], f"{name}.json has no source"
    assert "from memory" in data["note"] or "verif" in data["note"], f"{name}.json note must say what to verify"


def test_conductor_sizes_ascending_by_area() -> None:
    # NFPA 70 Chapter 9 Table 8 (2017/2020/2023): areas grow with the size order used everywhere.
    areas = [tables.circular_mils(s) for s in tables.conductor_sizes()]
    assert areas == sorted(areas)
    assert tables.conductor_sizes()[0] == "14" and tables.conductor_sizes()[-1] == "1000"


# --- Table 310.16 ----------------------------------------------------------------------------

AMPACITY = [
    # (edition label, material, size, column, amps) — NFPA 70 Table 310.16 (2020/2023) = Table 310.15(B)(16) (2017), from memory
    ("Cu", "14", 60, 15),
    ("Cu", "14", 75, 20),
    ("Cu", "14", 90, 25),
    ("Cu", "12", 75, 25),
    ("Cu", "10", 75, 35),
    ("Cu", "8", 75, 50),
    ("Cu", "6", 75, 65),
    ("Cu", "4", 75, 85),
    ("Cu", "3", 75, 100),
    ("Cu", "2", 75, 115),
    ("Cu", "1", 75, 130),
    ("Cu", "1/0", 75, 150),
    ("Cu", "2/0", 75, 175),
    ("Cu", "3/0", 75, 200),
    ("Cu", "3/0", 60, 165),
    ("Cu", "3/0", 90, 225),
    ("Cu", "4/0", 75, 230),
    ("Cu", "250", 75, 255),
    ("Cu", "300", 75, 285),
    ("Cu", "350", 75, 310),
    ("Cu", "400", 75, 335),
    ("Cu", "500", 75, 380),
    ("Cu", "500", 90, 430),
    ("Cu", "600", 75, 420),
    ("Cu", "750", 75, 475),
    ("Cu", "1000", 75, 545),
    ("Al", "12", 75, 20),
    ("Al", "6", 75, 50),
    ("Al", "2", 75, 90),
    ("Al", "1/0", 75, 120),
    ("Al", "4/0", 75, 180),
    ("Al", "250", 75, 205),
    ("Al", "350", 75, 250),
    ("Al", "500", 75, 310),
    ("Al", "750", 75, 385),
    ("Al", "1000", 75, 445),
]


@pytest.mark.parametrize(
    ("material", "size", "column", "amps"),
    AMPACITY,
    ids=[f"NFPA70-2023-T310.16-{c}C-{m}-{s}={a}A" for m, s, c, a in AMPACITY],
)
def test_table_310_16(material: str, size: str, column: int, amps: int) -> None:
    assert tables.ampacity_a(size, Material(material), column) == amps


def test_table_310_16_no_14_awg_aluminium() -> None:
    # NFPA 70-2023 Table 310.16: the aluminium columns start at 12 AWG (from memory).
    assert tables.ampacity_a("14", Material.AL, 75) is None


def test_table_310_16_columns_ordered() -> None:
    # Every row of Table 310.16: 60 °C ≤ 75 °C ≤ 90 °C, and ampacity grows with size (common practice check).
    for material in ("Cu", "Al"):
        rows = tables.ampacity_table()[material]
        previous = (0.0, 0.0, 0.0)
        for size in tables.conductor_sizes():
            if size not in rows:
                continue
            row = rows[size]
            assert row[0] <= row[1] <= row[2]
            assert all(a > b for a, b in zip(row, previous, strict=True)), (material, size)
            previous = row


@pytest.mark.parametrize(
    ("code", "expected"),
    [
        (CodeEdition.NEC_2017, "Table 310.15(B)(16)"),
        (CodeEdition.NEC_2020, "Table 310.16"),
        (CodeEdition.NEC_2023, "Table 310.16"),
    ],
    ids=["NFPA70-2017-T310.15(B)(16)", "NFPA70-2020-T310.16", "NFPA70-2023-T310.16"],
)
def test_ampacity_table_citation_by_edition(code: CodeEdition, expected: str) -> None:
    # The ampacity table moved from 310.15(B)(16) (2017) to 310.16 (2020 reorganisation), from memory.
    assert tables.section("ampacity_table", code) == expected


@pytest.mark.parametrize(
    ("key", "code", "expected"),
    [
        ("ambient_correction", CodeEdition.NEC_2017, "Table 310.15(B)(2)(a)"),
        ("ambient_correction", CodeEdition.NEC_2020, "Table 310.15(B)(1)"),
        ("ambient_correction", CodeEdition.NEC_2023, "Table 310.15(B)(1)(1)"),
        ("adjustment", CodeEdition.NEC_2017, "Table 310.15(B)(3)(a)"),
        ("adjustment", CodeEdition.NEC_2020, "Table 310.15(C)(1)"),
        ("adjustment", CodeEdition.NEC_2023, "Table 310.15(C)(1)"),
        ("parallel", CodeEdition.NEC_2017, "310.10(H)"),
        ("parallel", CodeEdition.NEC_2023, "310.10(G)"),
    ],
    ids=lambda v: str(v),
)
def test_section_numbers_by_edition(key: str, code: CodeEdition, expected: str) -> None:
    # NFPA 70 2017 / 2020 / 2023 section numbering, from memory.
    assert tables.section(key, code) == expected


# --- 240.6(A), 240.4(D), Table 250.122 ---------------------------------------------------------


def test_standard_ratings_240_6a() -> None:
    # NFPA 70-2023 240.6(A) standard ampere ratings, from memory.
    ratings = tables.standard_ocpd_ratings()
    assert ratings[:9] == (15, 20, 25, 30, 35, 40, 45, 50, 60)
    for r in (110, 125, 150, 175, 200, 225, 250, 300, 350, 400, 450, 500, 600, 700, 800, 1000, 1200, 1600, 2000):
        assert r in ratings
    assert ratings[-1] == 6000
    assert 900 not in ratings and 1100 not in ratings
    # Additional standard ratings for fuses: 1, 3, 6, 10 and 601 A.
    assert {1, 3, 6, 10, 601} <= set(tables.standard_ratings_with_fuses())


@pytest.mark.parametrize(
    ("size", "material", "amps"),
    [("14", "Cu", 15), ("12", "Cu", 20), ("10", "Cu", 30), ("12", "Al", 15), ("10", "Al", 25), ("8", "Cu", None)],
    ids=lambda v: str(v),
)
def test_small_conductor_rule_240_4d(size: str, material: str, amps: int | None) -> None:
    # NFPA 70-2023 240.4(D), from memory.
    assert tables.small_conductor_max_ocpd_a(size, Material(material)) == amps


EGC = [
    (15, "14", "12"),
    (20, "12", "10"),
    (60, "10", "8"),
    (100, "8", "6"),
    (200, "6", "4"),
    (300, "4", "2"),
    (400, "3", "1"),
    (600, "1", "2/0"),
    (800, "1/0", "3/0"),
    (1200, "3/0", "250"),
    (2000, "250", "400"),
    (4000, "500", "750"),
]


@pytest.mark.parametrize(("amps", "cu", "al"), EGC, ids=[f"NFPA70-2023-T250.122-{a}A={c}Cu/{al}Al" for a, c, al in EGC])
def test_table_250_122_rows(amps: int, cu: str, al: str) -> None:
    rows = {a: (c, al_) for a, c, al_ in tables.egc_rows()}
    assert rows[amps] == (cu, al)


# --- Chapter 9 Tables 8 and 9 -----------------------------------------------------------------


@pytest.mark.parametrize(
    ("size", "cmil"),
    [("12", 6530), ("10", 10380), ("6", 26240), ("1/0", 105600), ("3/0", 167800), ("4/0", 211600), ("250", 250000)],
    ids=lambda v: str(v),
)
def test_chapter9_table8_circular_mils(size: str, cmil: int) -> None:
    # NFPA 70-2023 Chapter 9 Table 8, from memory; kcmil by definition.
    assert tables.circular_mils(size) == cmil


T9 = [
    # size, material, conduit, R, XL — NFPA 70-2023 Chapter 9 Table 9, ohms/1000 ft, from memory
    ("12", "Cu", "pvc", 2.0, 0.054),
    ("10", "Cu", "steel", 1.2, 0.063),
    ("1/0", "Cu", "pvc", 0.12, 0.044),
    ("3/0", "Cu", "steel", 0.079, 0.052),
    ("3/0", "Cu", "aluminum", 0.082, 0.042),
    ("250", "Cu", "pvc", 0.052, 0.041),
    ("500", "Cu", "steel", 0.029, 0.048),
    ("500", "Al", "pvc", 0.043, 0.039),
    ("4/0", "Al", "steel", 0.10, 0.051),
    ("1000", "Cu", "pvc", 0.015, 0.037),
]


@pytest.mark.parametrize(
    ("size", "material", "conduit", "r", "xl"),
    T9,
    ids=[f"NFPA70-2023-Ch9T9-{s}-{m}-{c}-R={r}-XL={x}" for s, m, c, r, x in T9],
)
def test_chapter9_table9(size: str, material: str, conduit: str, r: float, xl: float) -> None:
    row = tables.table9()[size]
    assert row.resistance(Material(material), Conduit(conduit)) == r
    assert row.reactance(Conduit(conduit)) == xl
    assert not row.interpolated


def test_table9_interpolated_sizes_between_neighbours() -> None:
    # Table 9 has no 700/800/900 kcmil rows (NFPA 70-2023, from memory); interpolated ones must lie between.
    t9 = tables.table9()
    for size, lo, hi in (("700", "600", "750"), ("800", "750", "1000"), ("900", "750", "1000")):
        row = t9[size]
        assert row.interpolated
        r = row.resistance(Material.CU, Conduit.STEEL)
        assert t9[hi].resistance(Material.CU, Conduit.STEEL) < r < t9[lo].resistance(Material.CU, Conduit.STEEL)
        assert t9[hi].xl_steel <= row.xl_steel <= t9[lo].xl_steel
    assert set(tables.conductor_sizes()) == set(t9)


# --- Article 220 -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("units", "factor"),
    [(1, 1.0), (2, 1.0), (3, 0.9), (4, 0.8), (5, 0.7), (6, 0.65), (7, 0.65), (8, 0.65)],
    ids=[f"NFPA70-2023-T220.56-{n}units" for n in range(1, 9)],
)
def test_table_220_56_factors(units: int, factor: float) -> None:
    # NFPA 70-2023 Table 220.56 (same in 2017/2020), from memory.
    assert tables.kitchen_factor(units) == factor


@pytest.mark.parametrize(
    ("rule", "code", "expected"),
    [
        ("lighting", CodeEdition.NEC_2017, "220.42, Table 220.42"),
        ("lighting", CodeEdition.NEC_2020, "220.42, Table 220.42"),
        ("lighting", CodeEdition.NEC_2023, "220.45, Table 220.45"),
        ("receptacle", CodeEdition.NEC_2017, "220.44, Table 220.44"),
        ("receptacle", CodeEdition.NEC_2020, "220.44, Table 220.44"),
        ("receptacle", CodeEdition.NEC_2023, "220.47, Table 220.47"),
        ("kitchen", CodeEdition.NEC_2023, "220.56, Table 220.56"),
        ("noncoincident", CodeEdition.NEC_2020, "220.60"),
    ],
    ids=lambda v: str(v),
)
def test_demand_citations_by_edition(rule: str, code: CodeEdition, expected: str) -> None:
    # NFPA 70 2017/2020 vs 2023 renumbering of Article 220 Part III, from memory.
    assert tables.demand_citation(rule, code) == expected


UNIT_LOADS = [
    # NFPA 70-2017 Table 220.12 (from memory)
    ("2017", "office", 3.5),
    ("2017", "retail", 3.0),
    ("2017", "school", 3.0),
    ("2017", "restaurant", 2.0),
    ("2017", "hospital", 2.0),
    ("2017", "hotel", 2.0),
    ("2017", "warehouse", 0.25),
    ("2017", "dwelling", 3.0),
    ("2017", "industrial", 2.0),
    ("2017", "other", 3.5),
    # NFPA 70-2020 Table 220.12 (revised; from memory); dwelling 220.14(J)
    ("2020", "office", 1.3),
    ("2020", "retail", 1.9),
    ("2020", "school", 1.5),
    ("2020", "restaurant", 1.5),
    ("2020", "hospital", 1.6),
    ("2020", "hotel", 1.7),
    ("2020", "warehouse", 1.2),
    ("2020", "industrial", 2.2),
    ("2020", "dwelling", 3.0),
    ("2020", "other", 1.3),
    # NFPA 70-2023 Table 220.42(A) (from memory); dwelling 220.41
    ("2023", "office", 1.3),
    ("2023", "retail", 1.9),
    ("2023", "warehouse", 1.2),
    ("2023", "dwelling", 3.0),
]


@pytest.mark.parametrize(
    ("year", "occupancy", "va"),
    UNIT_LOADS,
    ids=[f"NFPA70-{y}-{'T220.42(A)' if y == '2023' else 'T220.12'}-{o}={v}VA/ft2" for y, o, v in UNIT_LOADS],
)
def test_lighting_unit_loads(year: str, occupancy: str, va: float) -> None:
    _, value = tables.lighting_unit_load(Occupancy(occupancy), CodeEdition(f"NEC-{year}"))
    assert value == va


def test_other_occupancy_maps_to_office_row_and_says_so() -> None:
    for code in CodeEdition:
        row, _ = tables.lighting_unit_load(Occupancy.OTHER, code)
        assert "Office" in row and "other" in row


# --- transformers -------------------------------------------------------------------------------


def test_transformer_kva_ratings() -> None:
    # IEEE C57.12.00 / NEMA ST 20 preferred ratings, from memory.
    three = tables.transformer_kva_ratings(True)
    assert three[:5] == (15.0, 30.0, 45.0, 75.0, 112.5)
    assert 3750.0 in three and three[-1] == 5000.0
    single = tables.transformer_kva_ratings(False)
    assert single == (10.0, 15.0, 25.0, 37.5, 50.0, 75.0, 100.0, 167.0, 250.0, 333.0, 500.0)


def test_k_ratings() -> None:
    # UL 1561 K-ratings, from memory.
    assert tables.k_factor_ratings()[:4] == (4, 9, 13, 20)
