"""Accepted system strings, their voltages and phasors, and the slot → phase map.

Nominal voltages: ANSI C84.1 nominal system voltages.  √3 relations, the 120° rotation and
the high-leg (centre-tapped) delta geometry: common practice.  Slot numbering (odd left,
even right, one row per two slots, phases A-B-C by row): common practice for panelboards.
"""

from __future__ import annotations

import math

import pytest

from server.calc.errors import UnknownSystemError
from server.calc.systems import (
    SQRT3,
    SYSTEMS,
    SystemKind,
    accepted_systems,
    breaker_phases,
    breaker_slots,
    get_system,
    slot_phase,
    slot_row,
    slot_side,
)
from tests.helpers import assert_close

# name → (kind, V_LN or None, V_LL used in arithmetic, phases, wires, nominal V_LL)
EXPECTED = {
    "120 1PH 2W": (SystemKind.SINGLE, 120.0, 120.0, ("A",), 2, 120.0),
    "277 1PH 2W": (SystemKind.SINGLE, 277.0, 277.0, ("A",), 2, 277.0),
    "120/240 1PH 3W": (SystemKind.SPLIT, 120.0, 240.0, ("A", "B"), 3, 240.0),
    "208Y/120 3PH 4W": (SystemKind.WYE, 120.0, SQRT3 * 120.0, ("A", "B", "C"), 4, 208.0),
    "480Y/277 3PH 4W": (SystemKind.WYE, 277.0, SQRT3 * 277.0, ("A", "B", "C"), 4, 480.0),
    "600Y/347 3PH 4W": (SystemKind.WYE, 347.0, SQRT3 * 347.0, ("A", "B", "C"), 4, 600.0),
    "240 3PH 3W": (SystemKind.DELTA, None, 240.0, ("A", "B", "C"), 3, 240.0),
    "480 3PH 3W": (SystemKind.DELTA, None, 480.0, ("A", "B", "C"), 3, 480.0),
    "600 3PH 3W": (SystemKind.DELTA, None, 600.0, ("A", "B", "C"), 3, 600.0),
    "240/120 3PH 4W": (SystemKind.HIGH_LEG, 120.0, 240.0, ("A", "B", "C"), 4, 240.0),
    "4160 3PH 3W": (SystemKind.DELTA, None, 4160.0, ("A", "B", "C"), 3, 4160.0),
    "12470Y/7200 3PH 4W": (SystemKind.WYE, 7200.0, SQRT3 * 7200.0, ("A", "B", "C"), 4, 12470.0),
    "13200 3PH 3W": (SystemKind.DELTA, None, 13200.0, ("A", "B", "C"), 3, 13200.0),
    "13800 3PH 3W": (SystemKind.DELTA, None, 13800.0, ("A", "B", "C"), 3, 13800.0),
    "24940Y/14400 3PH 4W": (SystemKind.WYE, 14400.0, SQRT3 * 14400.0, ("A", "B", "C"), 4, 24940.0),
    "34500 3PH 3W": (SystemKind.DELTA, None, 34500.0, ("A", "B", "C"), 3, 34500.0),
}


def test_every_system_is_listed() -> None:
    assert set(SYSTEMS) == set(EXPECTED)
    assert accepted_systems() == list(SYSTEMS)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_system_voltages_and_phasors(name: str) -> None:
    kind, v_ln, v_ll, phases, wires, nominal = EXPECTED[name]
    spec = get_system(name)
    assert spec.kind == kind
    assert spec.phases == phases and spec.wires == wires
    assert spec.v_ln == v_ln
    assert_close(spec.v_ll, v_ll, rel=1e-12)
    assert spec.nominal_v_ll() == nominal
    # Arithmetic V_LL is within 0.2 % of the nominal figure of the string (208 vs 207.8, 480 vs 479.8).
    assert_close(spec.v_ll, nominal, rel=0.002)
    assert spec.has_neutral == (kind != SystemKind.DELTA)
    assert spec.three_phase == (len(phases) == 3)
    assert spec.medium_voltage == (nominal > 1000)
    # Every line-to-line phasor has the magnitude V_LL.
    for i, p in enumerate(phases):
        for q in phases[i + 1 :]:
            assert_close(abs(spec.line_voltage(p, q)), spec.v_ll, rel=1e-12, what=f"{name} {p}{q}")
    if kind in (SystemKind.WYE, SystemKind.SINGLE, SystemKind.SPLIT):
        for p in phases:
            assert_close(abs(spec.phase_voltage(p)), v_ln, rel=1e-12)


def test_wye_rotation_abc() -> None:
    spec = get_system("208Y/120 3PH 4W")
    angles = {p: math.degrees(math.atan2(spec.phase_voltage(p).imag, spec.phase_voltage(p).real)) for p in "ABC"}
    assert_close(angles["A"], 0.0, abs_=1e-9)
    assert_close(angles["B"], -120.0)
    assert_close(angles["C"], 120.0)
    # V_AB leads V_A by 30° (common practice for ABC rotation).
    v_ab = spec.line_voltage("A", "B")
    assert_close(math.degrees(math.atan2(v_ab.imag, v_ab.real)), 30.0)
    assert abs(sum(spec.phase_voltage(p) for p in "ABC")) < 1e-9


def test_split_phase_lines_are_opposite() -> None:
    spec = get_system("120/240 1PH 3W")
    assert spec.phase_voltage("A") == -spec.phase_voltage("B")
    assert_close(abs(spec.line_voltage("A", "B")), 240.0)


def test_high_leg_delta() -> None:
    spec = get_system("240/120 3PH 4W")
    assert spec.high_leg == "B"
    assert_close(abs(spec.phase_voltage("A")), 120.0)
    assert_close(abs(spec.phase_voltage("C")), 120.0)
    assert_close(abs(spec.phase_voltage("B")), 240.0 * SQRT3 / 2.0)  # ≈ 207.8 V, common practice "208 V wild leg"
    for other in ("208Y/120 3PH 4W", "480 3PH 3W", "120/240 1PH 3W"):
        assert get_system(other).high_leg is None


def test_unknown_system_lists_the_accepted_forms() -> None:
    with pytest.raises(UnknownSystemError) as err:
        get_system("208V 3 phase")
    assert "208Y/120 3PH 4W" in str(err.value) and "208V 3 phase" in str(err.value)


def test_slot_rows_sides_and_phases() -> None:
    assert [slot_row(s) for s in (1, 2, 3, 4, 41, 42)] == [1, 1, 2, 2, 21, 21]
    assert slot_side(1) == "left" and slot_side(2) == "right"
    three = get_system("208Y/120 3PH 4W")
    assert [slot_phase(three, s) for s in range(1, 13)] == list("AABBCCAABBCC")
    split = get_system("120/240 1PH 3W")
    assert [slot_phase(split, s) for s in range(1, 9)] == list("AABBAABB")
    two = get_system("277 1PH 2W")
    assert {slot_phase(two, s) for s in range(1, 20)} == {"A"}


def test_breaker_slots_and_phases() -> None:
    assert breaker_slots(1, 1) == (1,)
    assert breaker_slots(2, 3) == (2, 4, 6)
    assert breaker_slots(7, 2) == (7, 9)
    three = get_system("480Y/277 3PH 4W")
    assert breaker_phases(three, 1, 3) == ("A", "B", "C")
    assert breaker_phases(three, 3, 3) == ("B", "C", "A")
    assert breaker_phases(three, 5, 2) == ("C", "A")
    split = get_system("120/240 1PH 3W")
    assert breaker_phases(split, 4, 2) == ("B", "A")
