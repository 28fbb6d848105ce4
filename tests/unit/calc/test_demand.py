"""NEC Article 220 demand: each rule checked against the published tables and a worked example.

Sources: NFPA 70 (2017, 2020, 2023) Article 220 Part III and Informative Annex D, from memory.
"""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from server.calc.demand import (
    LARGEST_MOTOR_STEP,
    DemandInput,
    apply_demand,
    apply_tiers,
    estimate_lighting_va,
    lighting_unit_load_va_per_ft2,
)
from server.calc.model import CodeEdition, Occupancy
from tests.helpers import assert_close

NEC23 = CodeEdition.NEC_2023


def _inp(
    connected: dict[str, float],
    continuous: dict[str, float] | None = None,
    *,
    kitchen_units: int = 0,
    two: tuple[float, float] = (0.0, 0.0),
    motor: float = 0.0,
    cooling: float = 0.0,
) -> DemandInput:
    return DemandInput(
        connected_by_category=connected,
        continuous_by_category=continuous or {},
        kitchen_units=kitchen_units,
        kitchen_two_largest_va=two,
        largest_motor_va=motor,
        largest_cooling_va=cooling,
    )


def _step(result, category: str):
    matches = [s for s in result.steps if s.category == category]
    assert len(matches) == 1, [s.category for s in result.steps]
    return matches[0]


# --- receptacles ---------------------------------------------------------------------------------


def test_receptacles_annex_d_example_d3_store() -> None:
    # NFPA 70-2023 Informative Annex D, Example D3 (store building), from memory:
    # 80 duplex receptacles × 180 VA = 14,400 VA; first 10,000 VA at 100 % + 4,400 VA at 50 % = 12,200 VA.
    result = apply_demand(_inp({"receptacle": 80 * 180.0}), code=NEC23, occupancy=Occupancy.RETAIL)
    assert_close(result.demand_va, 12_200.0)
    step = _step(result, "receptacle")
    assert step.rule == "NEC-2023 220.47, Table 220.47"
    assert "first 10,000 VA at 100 %" in step.note and "remainder at 50 %" in step.note


@pytest.mark.parametrize(
    ("code", "rule"),
    [
        (CodeEdition.NEC_2017, "NEC-2017 220.44, Table 220.44"),
        (CodeEdition.NEC_2020, "NEC-2020 220.44, Table 220.44"),
        (CodeEdition.NEC_2023, "NEC-2023 220.47, Table 220.47"),
    ],
    ids=["NFPA70-2017-220.44", "NFPA70-2020-220.44", "NFPA70-2023-220.47-from-memory"],
)
def test_receptacle_rule_cites_edition(code: CodeEdition, rule: str) -> None:
    result = apply_demand(_inp({"receptacle": 8000.0}), code=code, occupancy=Occupancy.OFFICE)
    assert _step(result, "receptacle").rule == rule
    assert_close(result.demand_va, 8000.0)  # under 10 kVA: 100 % (Table 220.44/220.47)


# --- kitchen Table 220.56 -------------------------------------------------------------------------

KITCHEN = [(1, 1.0), (2, 1.0), (3, 0.9), (4, 0.8), (5, 0.7), (6, 0.65), (7, 0.65), (8, 0.65)]


@pytest.mark.parametrize(("units", "factor"), KITCHEN, ids=[f"NFPA70-2023-T220.56-{n}units" for n, _ in KITCHEN])
def test_kitchen_by_units(units: int, factor: float) -> None:
    # NFPA 70-2023 Table 220.56, from memory: equal 5 kVA units; the two-largest floor (10 kVA) never binds here.
    connected = 5000.0 * units
    result = apply_demand(
        _inp({"kitchen": connected}, kitchen_units=units, two=(5000.0, 5000.0 if units > 1 else 0.0)),
        code=NEC23,
        occupancy=Occupancy.RESTAURANT,
    )
    assert_close(result.demand_va, connected * factor)
    assert _step(result, "kitchen").rule == "NEC-2023 220.56, Table 220.56"


def test_kitchen_two_largest_floor() -> None:
    # NFPA 70-2023 Table 220.56 note, from memory: never less than the two largest units.
    # 6 units: 12 kVA + 10 kVA + 4 × 1 kVA = 26 kVA × 65 % = 16.9 kVA < 22 kVA → 22 kVA.
    result = apply_demand(
        _inp({"kitchen": 26_000.0}, kitchen_units=6, two=(12_000.0, 10_000.0)),
        code=NEC23,
        occupancy=Occupancy.RESTAURANT,
    )
    assert_close(result.demand_va, 22_000.0)
    assert "two largest" in _step(result, "kitchen").note


# --- noncoincident and largest motor -----------------------------------------------------------


def test_noncoincident_heating_larger_drops_cooling_and_its_motor() -> None:
    # NFPA 70-2023 220.60 (smaller noncoincident load omitted) and 220.50/430.24 (25 % of largest motor), from memory.
    # Heating 10 kVA kept, cooling 8 kVA dropped; the 8 kVA compressor is no candidate, so 25 % of the 5 kVA motor.
    result = apply_demand(
        _inp({"heating": 10_000.0, "cooling": 8_000.0, "motor": 5_000.0}, motor=5_000.0, cooling=8_000.0),
        code=NEC23,
        occupancy=Occupancy.OFFICE,
    )
    assert _step(result, "cooling").demand_va == 0.0
    assert _step(result, "heating").demand_va == 10_000.0
    assert result.largest_motor_va == 5_000.0
    assert_close(_step(result, LARGEST_MOTOR_STEP).demand_va, 1_250.0)
    assert_close(result.demand_va, 10_000.0 + 5_000.0 + 1_250.0)
    assert _step(result, "cooling").rule == "NEC-2023 220.60"


def test_noncoincident_cooling_larger_keeps_cooling_as_largest_motor() -> None:
    # NFPA 70-2023 220.60 and 430.24, from memory: cooling 12 kVA kept (largest unit 6 kVA > 3 kVA motor).
    result = apply_demand(
        _inp({"heating": 5_000.0, "cooling": 12_000.0, "motor": 3_000.0}, motor=3_000.0, cooling=6_000.0),
        code=NEC23,
        occupancy=Occupancy.OFFICE,
    )
    assert _step(result, "heating").demand_va == 0.0
    assert result.largest_motor_va == 6_000.0
    assert_close(result.demand_va, 12_000.0 + 3_000.0 + 0.25 * 6_000.0)


def test_noncoincident_tie_keeps_cooling() -> None:
    # NFPA 70-2023 220.60 lets either of two equal noncoincident loads be omitted; the program keeps cooling
    # (documented choice) so its compressor still counts for the 25 % largest-motor rule.
    result = apply_demand(
        _inp({"heating": 6_000.0, "cooling": 6_000.0}, cooling=6_000.0), code=NEC23, occupancy=Occupancy.OFFICE
    )
    assert _step(result, "heating").demand_va == 0.0
    assert_close(result.demand_va, 6_000.0 + 1_500.0)


def test_no_motor_no_motor_step() -> None:
    result = apply_demand(_inp({"lighting": 1000.0}), code=NEC23, occupancy=Occupancy.OFFICE)
    assert [s.category for s in result.steps] == ["lighting"]
    assert result.largest_motor_va == 0.0


# --- lighting demand by occupancy -----------------------------------------------------------------

LIGHTING = [
    # (occupancy, connected VA, expected demand VA) — NFPA 70-2023 Table 220.45 (Table 220.42 in 2017/2020), from memory
    ("dwelling", 150_000.0, 3_000 + 117_000 * 0.35 + 30_000 * 0.25),  # 51,450 VA
    ("hospital", 80_000.0, 50_000 * 0.40 + 30_000 * 0.20),  # 26,000 VA
    ("hotel", 150_000.0, 20_000 * 0.50 + 80_000 * 0.40 + 50_000 * 0.30),  # 57,000 VA
    ("warehouse", 20_000.0, 12_500 + 7_500 * 0.50),  # 16,250 VA
    ("office", 100_000.0, 100_000.0),  # all others 100 %
    ("school", 40_000.0, 40_000.0),
]


@pytest.mark.parametrize(
    ("occupancy", "connected", "expected"), LIGHTING, ids=[f"NFPA70-2023-T220.45-{o}" for o, _, _ in LIGHTING]
)
def test_lighting_demand_by_occupancy(occupancy: str, connected: float, expected: float) -> None:
    result = apply_demand(
        _inp({"lighting": connected}, {"lighting": connected}), code=NEC23, occupancy=Occupancy(occupancy)
    )
    assert_close(result.demand_va, expected)
    # Continuous part scaled by the same factor (all of it continuous here).
    assert_close(result.continuous_demand_va, expected)
    assert _step(result, "lighting").rule == "NEC-2023 220.45, Table 220.45"


@pytest.mark.parametrize(
    ("code", "rule"),
    [(CodeEdition.NEC_2017, "NEC-2017 220.42, Table 220.42"), (CodeEdition.NEC_2020, "NEC-2020 220.42, Table 220.42")],
    ids=["NFPA70-2017-T220.42", "NFPA70-2020-T220.42"],
)
def test_lighting_rule_older_editions(code: CodeEdition, rule: str) -> None:
    result = apply_demand(_inp({"lighting": 80_000.0}), code=code, occupancy=Occupancy.HOSPITAL)
    assert _step(result, "lighting").rule == rule
    assert_close(result.demand_va, 26_000.0)


def test_dwelling_receptacles_share_the_lighting_table() -> None:
    # NFPA 70-2023 220.41 / 2020 220.14(J) (from memory): dwelling general-use receptacles are in the
    # general lighting load; 2,000 + 2,000 VA = 4,000 VA → 3,000 + 1,000 × 35 % = 3,350 VA, split pro rata.
    result = apply_demand(_inp({"lighting": 2_000.0, "receptacle": 2_000.0}), code=NEC23, occupancy=Occupancy.DWELLING)
    assert_close(result.demand_va, 3_350.0)
    assert_close(_step(result, "receptacle").demand_va, 1_675.0)
    assert _step(result, "receptacle").rule.startswith("NEC-2023 220.45")


def test_continuous_part_uses_category_factor() -> None:
    # Receptacles 20 kVA of which 10 kVA continuous: factor (10 + 5)/20 = 0.75 → 7.5 kVA continuous demand.
    # Lighting (office) 100 %; heating at 100 %.  NFPA 70-2023 220.47, from memory.
    result = apply_demand(
        _inp({"receptacle": 20_000.0, "lighting": 5_000.0}, {"receptacle": 10_000.0, "lighting": 5_000.0}),
        code=NEC23,
        occupancy=Occupancy.OFFICE,
    )
    assert_close(result.demand_va, 15_000.0 + 5_000.0)
    assert_close(result.continuous_demand_va, 7_500.0 + 5_000.0)


def test_other_categories_at_100_percent() -> None:
    result = apply_demand(
        _inp({"ev_charging": 7_200.0, "equipment": 3_000.0, "spare": 1_000.0}),
        code=NEC23,
        occupancy=Occupancy.OFFICE,
    )
    assert_close(result.demand_va, 11_200.0)
    assert len(result.steps) == 3


def test_apply_tiers_by_hand() -> None:
    # Hotel tiers (NFPA 70-2023 Table 220.45, from memory) at exactly the bounds.
    tiers = ((20_000.0, 0.5), (100_000.0, 0.4), (None, 0.3))
    assert_close(apply_tiers(20_000.0, tiers), 10_000.0)
    assert_close(apply_tiers(100_000.0, tiers), 42_000.0)
    assert apply_tiers(0.0, tiers) == 0.0


# --- lighting unit loads --------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("code", "occupancy", "va_ft2"),
    [
        (CodeEdition.NEC_2017, Occupancy.OFFICE, 3.5),
        (CodeEdition.NEC_2020, Occupancy.OFFICE, 1.3),
        (CodeEdition.NEC_2023, Occupancy.OFFICE, 1.3),
        (CodeEdition.NEC_2017, Occupancy.WAREHOUSE, 0.25),
        (CodeEdition.NEC_2020, Occupancy.WAREHOUSE, 1.2),
        (CodeEdition.NEC_2020, Occupancy.DWELLING, 3.0),
    ],
    ids=[
        "NFPA70-2017-T220.12-office",
        "NFPA70-2020-T220.12-office",
        "NFPA70-2023-T220.42(A)-office",
        "NFPA70-2017-T220.12-warehouse",
        "NFPA70-2020-T220.12-warehouse",
        "NFPA70-2020-220.14(J)-dwelling",
    ],
)
def test_unit_load_edition_difference(code: CodeEdition, occupancy: Occupancy, va_ft2: float) -> None:
    # From memory: the 2020 revision of Table 220.12 lowered most non-dwelling unit loads.
    assert lighting_unit_load_va_per_ft2(occupancy, code) == va_ft2
    assert_close(estimate_lighting_va(10_000.0, occupancy, code), 10_000.0 * va_ft2)


def test_estimate_rejects_negative_area() -> None:
    with pytest.raises(ValueError, match="area_ft2"):
        estimate_lighting_va(-1.0, Occupancy.OFFICE, NEC23)


# --- properties -------------------------------------------------------------------------------------

_va = st.floats(min_value=0.0, max_value=2e6, allow_nan=False)


@given(
    lighting=_va,
    receptacle=_va,
    kitchen=_va,
    motor=st.floats(min_value=0.0, max_value=1e5),
    occupancy=st.sampled_from(list(Occupancy)),
    code=st.sampled_from(list(CodeEdition)),
)
def test_demand_never_exceeds_connected_plus_motor_quarter(
    lighting: float, receptacle: float, kitchen: float, motor: float, occupancy: Occupancy, code: CodeEdition
) -> None:
    connected = {"lighting": lighting, "receptacle": receptacle, "kitchen": kitchen, "motor": motor}
    result = apply_demand(
        _inp(connected, kitchen_units=4, two=(kitchen / 4, kitchen / 4), motor=motor), code=code, occupancy=occupancy
    )
    assert result.demand_va <= sum(connected.values()) + 0.25 * motor + 1e-6
    assert result.demand_va >= 0.0


@given(a=_va, b=_va, occupancy=st.sampled_from(list(Occupancy)))
def test_demand_monotone_in_load(a: float, b: float, occupancy: Occupancy) -> None:
    lo, hi = sorted((a, b))
    for cat in ("lighting", "receptacle"):
        d_lo = apply_demand(_inp({cat: lo}), code=NEC23, occupancy=occupancy).demand_va
        d_hi = apply_demand(_inp({cat: hi}), code=NEC23, occupancy=occupancy).demand_va
        assert d_lo <= d_hi + 1e-6
