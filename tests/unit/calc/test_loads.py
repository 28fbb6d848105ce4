"""Loads and currents (server.calc.loads) against facts of the trade.

Sources: "common practice" marks textbook facts of three-phase circuits (phasor sums,
√3 relations); ANSI C84.1 for the nominal system voltages; IEEE C57.12.00 for the ANSI
30° angular displacement (LV lags HV) of delta–wye banks.
"""

from __future__ import annotations

import cmath
import math

import pytest

from server.calc.errors import CalcError
from server.calc.loads import (
    circuit_currents,
    circuit_phase_va,
    imbalance_pct,
    load_amps,
    neutral_current,
    neutral_from_loads,
    reflect_through_transformer,
    reflect_triplens,
    triplen_rotation,
    va_from_amps,
    va_from_kva,
)
from server.calc.systems import SQRT3, SYSTEMS
from tests.helpers import assert_close

W208 = SYSTEMS["208Y/120 3PH 4W"]
W480 = SYSTEMS["480Y/277 3PH 4W"]
D480 = SYSTEMS["480 3PH 3W"]
D240 = SYSTEMS["240 3PH 3W"]
HL = SYSTEMS["240/120 3PH 4W"]
SPLIT = SYSTEMS["120/240 1PH 3W"]
ONE = SYSTEMS["120 1PH 2W"]


def test_208_is_root3_times_120_and_480_is_root3_times_277() -> None:
    # ANSI C84.1 nominal voltages; V_LL = √3 · V_LN (common practice).
    assert_close(abs(W208.line_voltage("A", "B")), 208.0, rel=0.002, what="208Y/120 V_AB")
    assert_close(abs(W480.line_voltage("B", "C")), 480.0, rel=0.002, what="480Y/277 V_BC")
    assert_close(W208.v_ll, SQRT3 * 120.0, rel=1e-12)


def test_balanced_100a_currents_sum_to_zero() -> None:
    # Common practice: three equal currents 120° apart sum to zero, so a balanced neutral carries nothing.
    currents = [cmath.rect(100.0, math.radians(a)) for a in (0.0, -120.0, 120.0)]
    assert abs(sum(currents)) < 1e-9
    # The same through the library: one 12 kVA 1-pole load on each phase of a 208Y/120 panel.
    loads = []
    for slot in (1, 3, 5):  # rows 1, 2, 3 = phases A, B, C
        ((phase, i),) = circuit_currents(W208, slot, 1, 12_000.0, 1.0).items()
        assert_close(abs(i), 100.0, what=f"phase {phase}")
        loads.append((i, 0.0, triplen_rotation(W208, phase)))
    assert neutral_from_loads(loads) < 1e-9


def test_single_phase_load_returns_all_its_current_on_the_neutral() -> None:
    # Common practice: one line-to-neutral load on a 3-phase 4-wire system → I_N = I_load.
    ((_, i),) = circuit_currents(W480, 3, 1, 27_700.0, 0.9).items()
    assert_close(abs(i), 100.0)
    assert_close(neutral_from_loads([(i, 0.0, 1 + 0j)]), 100.0)


def test_high_leg_is_about_208_v_to_neutral() -> None:
    # Common practice: the high (wild) leg of a 240/120 V 4-wire delta is √3/2 × 240 ≈ 208 V to neutral.
    assert_close(abs(HL.phase_voltage("B")), 207.8, rel=0.001)
    assert_close(abs(HL.phase_voltage("A")), 120.0)
    assert_close(abs(HL.phase_voltage("C")), 120.0)
    for p, q in (("A", "B"), ("B", "C"), ("C", "A")):
        assert_close(abs(HL.line_voltage(p, q)), 240.0)


def test_two_pole_208v_load_draws_s_over_208_in_both_lines() -> None:
    # Common practice: a 2-pole (line-to-line) load of S on 208 V draws S/208 in each of its lines.
    s = 4_160.0
    currents = circuit_currents(W208, 1, 2, s, 0.85)
    assert set(currents) == {"A", "B"}
    for i in currents.values():
        assert_close(abs(i), s / 208.0, rel=0.002)
    assert abs(sum(currents.values())) < 1e-9  # nothing on the neutral
    assert_close(load_amps(W208, 2, s), s / 208.0, rel=0.002)


def test_three_pole_load_current_is_s_over_root3_vll_on_every_system() -> None:
    # Common practice: I = S / (√3 · V_LL) for a balanced three-phase load, wye, delta or high-leg.
    for spec in (W208, W480, D480, HL):
        currents = circuit_currents(spec, 1, 3, 45_000.0, 0.8)
        for i in currents.values():
            assert_close(abs(i), 45_000.0 / (SQRT3 * spec.v_ll), what=spec.name)
        assert abs(sum(currents.values())) < 1e-9


def test_current_lags_its_voltage_by_the_power_factor_angle() -> None:
    ((_, i),) = circuit_currents(W208, 1, 1, 1_200.0, 0.8).items()
    assert_close(cmath.phase(i), -math.acos(0.8), rel=1e-9)


def test_phase_va_trade_convention() -> None:
    assert circuit_phase_va(W208, 1, 1, 1_000.0) == {"A": 1_000.0}
    assert circuit_phase_va(W208, 4, 2, 1_000.0) == {"B": 500.0, "C": 500.0}
    va = circuit_phase_va(W208, 5, 3, 3_000.0)
    assert set(va) == {"A", "B", "C"} and all(abs(v - 1_000.0) < 1e-9 for v in va.values())
    assert circuit_phase_va(SPLIT, 3, 1, 600.0) == {"B": 600.0}


def test_imbalance() -> None:
    assert imbalance_pct({"A": 0.0, "B": 0.0, "C": 0.0}) == 0.0
    assert imbalance_pct({"A": 100.0, "B": 100.0, "C": 100.0}) == 0.0
    # avg = 100; max deviation = 50 → 50 %.
    assert_close(imbalance_pct({"A": 150.0, "B": 100.0, "C": 50.0}), 50.0)
    assert imbalance_pct({"A": 10.0}) == 0.0


def test_triplens_add_on_a_wye_neutral_and_cancel_on_split_phase() -> None:
    # Common practice: third harmonics of the three phases of a wye are in phase on the neutral.
    n3 = sum(10.0 * triplen_rotation(W208, p) for p in "ABC")
    assert_close(abs(n3), 30.0)
    # On 120/240 V the two lines are 180° apart; their third harmonics are 540° ≡ 180° apart.
    assert abs(10.0 * triplen_rotation(SPLIT, "A") + 10.0 * triplen_rotation(SPLIT, "B")) < 1e-9
    assert_close(neutral_current(3 + 0j, 4 + 0j), 5.0)


def test_delta_wye_reflection_balanced() -> None:
    # Delta primary, wye secondary: |I_A| = √3·I/n with n = V_LL,pri / V_LN,sec; primary VA = secondary VA.
    i_sec = circuit_currents(W208, 1, 3, 75_000.0, 1.0)
    prim = reflect_through_transformer(W208, D480, i_sec, ("A", "B", "C"))
    n = 480.0 / 120.0
    for p in "ABC":
        assert_close(abs(prim[p]), SQRT3 * abs(i_sec[p]) / n, what=p)
        assert_close(abs(prim[p]), 75_000.0 / (SQRT3 * 480.0), rel=0.002, what=p)
    # ANSI: LV lags HV by 30° → the primary current of A sits 30° ahead of the secondary's own-reference
    # current and in phase with V_A at unity power factor.
    assert abs(cmath.phase(prim["A"])) < 1e-9


def test_delta_wye_single_line_to_neutral_load_appears_on_two_primary_lines() -> None:
    # A 1-pole secondary load of I on phase a: I_A = I/n, I_C = −I/n, I_B = 0 (zero sequence stays in the delta).
    i_sec = circuit_currents(W208, 1, 1, 12_000.0, 1.0)
    prim = reflect_through_transformer(W208, D480, i_sec, ("A", "B", "C"))
    assert_close(abs(prim["A"]), 100.0 / 4.0)
    assert_close(abs(prim["C"]), 100.0 / 4.0)
    assert abs(prim["B"]) < 1e-9
    assert abs(sum(prim.values())) < 1e-9


def test_wye_wye_passes_zero_sequence() -> None:
    i_sec = circuit_currents(W208, 1, 1, 12_000.0, 1.0)
    prim = reflect_through_transformer(W208, W480, i_sec, ("A", "B", "C"))
    assert_close(abs(prim["A"]), 100.0 * 120.0 / 277.0)
    assert_close(abs(sum(prim.values())), 100.0 * 120.0 / 277.0)


def test_high_leg_line_to_neutral_load_is_half_in_the_tapped_winding() -> None:
    # 1200 VA at 120 V (10 A) on a–n flows in half of winding c–a: 1200 VA in the 480 V primary winding CA.
    i_sec = circuit_currents(HL, 1, 1, 1_200.0, 1.0)
    prim = reflect_through_transformer(HL, D480, i_sec, ("A", "B", "C"))
    assert_close(abs(prim["A"]), 1_200.0 / 480.0)
    assert_close(abs(prim["C"]), 1_200.0 / 480.0)
    assert abs(prim["B"]) < 1e-9


def test_single_phase_transformer_from_two_primary_lines() -> None:
    # 24 kVA 120/240 V from lines A–B of 480Y/277: I = 24 000 / 480 in both lines, opposite.
    i_sec = circuit_currents(SPLIT, 1, 2, 24_000.0, 1.0)
    prim = reflect_through_transformer(SPLIT, W480, i_sec, ("A", "B"))
    assert_close(abs(prim["A"]), 50.0, rel=0.002)
    assert abs(prim["A"] + prim["B"]) < 1e-9
    # In phase with V_AB at unity power factor.
    assert_close(cmath.phase(prim["A"]), cmath.phase(W480.line_voltage("A", "B")), rel=1e-9)
    # A 120 V load on one half: half its current per turns ratio.
    i_sec = circuit_currents(SPLIT, 1, 1, 1_200.0, 1.0)
    prim = reflect_through_transformer(SPLIT, W480, i_sec, ("A", "B"))
    assert_close(abs(prim["A"]), 1_200.0 / 480.0, rel=0.002)


def test_single_phase_two_wire_fed_line_to_neutral() -> None:
    i_sec = circuit_currents(ONE, 1, 1, 2_400.0, 1.0)
    prim = reflect_through_transformer(ONE, W480, i_sec, ("B",))
    assert set(prim) == {"B"}
    assert_close(abs(prim["B"]), 2_400.0 / 277.0)
    i3, n3 = reflect_triplens(ONE, W480, {"A": 6.0}, 6.0 + 0j, ("B",))
    assert_close(i3["B"], 6.0 * 120.0 / 277.0)
    assert_close(abs(n3), 6.0 * 120.0 / 277.0)


def test_triplens_stay_in_a_delta() -> None:
    i3, n3 = reflect_triplens(W208, D480, {"A": 5.0, "B": 5.0, "C": 5.0}, 15 + 0j, ("A", "B", "C"))
    assert i3 == {} and n3 == 0j


@pytest.mark.parametrize("spec", [W208, W480, D480, D240, HL])
def test_reflection_conserves_power(spec) -> None:
    # An ideal transformer: Σ V·conj(I) equal on both sides for an arbitrary unbalanced load set.
    sec = W208
    i_sec: dict[str, complex] = {p: 0j for p in "ABC"}
    for slot, poles, va, pf in ((1, 1, 3_000.0, 0.9), (4, 2, 5_000.0, 0.8), (7, 3, 9_000.0, 0.85), (3, 1, 800.0, 1.0)):
        for p, i in circuit_currents(sec, slot, poles, va, pf).items():
            i_sec[p] += i
    s_sec = sum(sec.phase_voltage(p) * i_sec[p].conjugate() for p in "ABC")
    pri = spec  # the primary winding: wye, delta or centre-tapped delta
    prim = reflect_through_transformer(sec, pri, i_sec, ("A", "B", "C"))
    if pri.kind.value in ("delta", "high_leg"):
        # Only line-to-line voltages are defined on a delta: use V_AC and V_BC with I_A, I_B.
        s_pri = pri.line_voltage("A", "C") * prim["A"].conjugate() + pri.line_voltage("B", "C") * prim["B"].conjugate()
    else:
        s_pri = sum(pri.phase_voltage(p) * prim[p].conjugate() for p in "ABC")
    assert_close(abs(s_pri), abs(s_sec), rel=1e-9)
    assert_close(s_pri.real, s_sec.real, rel=1e-9)


@pytest.mark.parametrize(
    ("primary", "secondary"),
    [("480Y/277 3PH 4W", "240 3PH 3W"), ("480 3PH 3W", "240 3PH 3W"), ("480 3PH 3W", "240/120 3PH 4W")],
)
def test_wye_delta_and_delta_delta_balanced_reflection(primary: str, secondary: str) -> None:
    # Common practice: a balanced load of S draws S/(√3·V_LL) on each side of any three-phase bank.
    sec, pri = SYSTEMS[secondary], SYSTEMS[primary]
    prim = reflect_through_transformer(sec, pri, circuit_currents(sec, 1, 3, 60_000.0, 0.9), ("A", "B", "C"))
    for p in "ABC":
        assert_close(abs(prim[p]), 60_000.0 / (SQRT3 * pri.v_ll), rel=1e-9, what=f"{primary}–{secondary} {p}")
    assert abs(sum(prim.values())) < 1e-9


def test_wye_delta_unbalanced_line_to_line_load() -> None:
    # A single 240 V load of I between a and b of a Y–Δ bank (480Y/277 → 240 Δ): the winding a–b carries
    # 2I/3 and the other two windings I/3 (the floating star forces Σ winding currents = 0), so the
    # primary lines carry 2I/3n, I/3n, I/3n with n = 277/240.
    sec, pri = SYSTEMS["240 3PH 3W"], SYSTEMS["480Y/277 3PH 4W"]
    i_sec = circuit_currents(sec, 1, 2, 2_400.0, 1.0)  # 10 A, lines A and B
    prim = reflect_through_transformer(sec, pri, i_sec, ("A", "B", "C"))
    n = 277.0 / 240.0
    assert sorted(abs(v) for v in prim.values()) == pytest.approx(
        sorted([10 / 3 / n, 10 / 3 / n, 20 / 3 / n]), rel=1e-9
    )


@pytest.mark.parametrize(
    ("system", "poles", "amps", "expected_va"),
    [
        # common practice: 1-pole VA = I × V_LN, 2-pole VA = I × V_LL, 3-pole VA = √3 × V_LL × I (nominal voltages)
        ("208Y/120 3PH 4W", 1, 10.0, 1200.0),
        ("208Y/120 3PH 4W", 2, 10.0, 2080.0),
        ("480Y/277 3PH 4W", 3, 10.0, 8313.8),
        ("120/240 1PH 3W", 2, 10.0, 2400.0),
    ],
)
def test_va_from_amps_uses_nominal_voltages(system, poles, amps, expected_va) -> None:
    assert_close(va_from_amps(amps, poles, SYSTEMS[system]), expected_va, rel=1e-4)


def test_va_from_amps_refuses_a_one_pole_load_without_a_neutral() -> None:
    with pytest.raises(CalcError, match="no neutral"):
        va_from_amps(10.0, 1, SYSTEMS["480 3PH 3W"])


def test_va_from_kva() -> None:
    # 1 kVA = 1000 VA (SI prefix); a schedule's kW column is read as kVA at unity power factor.
    assert va_from_kva(12.5) == 12_500.0
    assert va_from_kva(0.0) == 0.0
