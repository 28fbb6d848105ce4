"""Bolted fault current by the ohmic method (IEEE Std 141-1993 Chapter 4; IEEE Std 242 style).

Worked examples are computed by hand (the arithmetic is in the comments); table values are
NFPA 70-2023 Chapter 9 Table 9 (from memory).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from server.calc.faults import (
    bolted_fault_ka,
    refer_impedance,
    single_phase_loop_impedance,
    source_impedance,
    transformer_impedance,
    x_over_r,
)
from server.calc.systems import SYSTEMS
from server.calc.transformers import full_load_amps
from server.calc.voltage_drop import feeder_impedance_ohm
from tests.helpers import assert_close

WYE480 = SYSTEMS["480Y/277 3PH 4W"]
WYE208 = SYSTEMS["208Y/120 3PH 4W"]
SPLIT = SYSTEMS["120/240 1PH 3W"]


def test_infinite_bus_1000kva_480v() -> None:
    # Common practice infinite-bus method: I_sc = FLA × 100 / %Z.
    # FLA = 1,000,000 / (√3 × 480) = 1202.8 A; × 100 / 5.75 = 20,918 A ≈ 20.9 kA.
    z = transformer_impedance(1000.0, 5.75, None, 480.0, True)
    assert_close(bolted_fault_ka(z, WYE480), 20.918, rel=1e-3)
    assert x_over_r(z) is None  # X/R not given: pure reactance


@pytest.mark.parametrize(
    ("kva", "z_pct", "system", "three_phase"),
    [
        (75.0, 3.5, WYE208, True),
        (500.0, 5.0, WYE480, True),
        (50.0, 2.5, SPLIT, False),
        (167.0, 3.0, SPLIT, False),
    ],
    ids=["75kVA-208Y", "500kVA-480Y", "50kVA-120/240-1ph", "167kVA-120/240-1ph"],
)
def test_infinite_source_gives_fla_over_z(kva: float, z_pct: float, system, three_phase: bool) -> None:
    # Common practice infinite-bus method, single-phase transformers included: I = FLA × 100/%Z.
    v = system.nominal_v_ll()
    z = transformer_impedance(kva, z_pct, 4.0, v, three_phase)
    expected_ka = full_load_amps(kva, v, three_phase) * 100.0 / z_pct / 1000.0
    if not three_phase:
        z = single_phase_loop_impedance(z)  # no upstream, no conductors
    assert_close(bolted_fault_ka(z, system), expected_ka, rel=1e-9)


def test_single_phase_50kva_by_hand() -> None:
    # 50 kVA 120/240 V, 2.5 %Z: Z = 0.025 × 240² / 50,000 = 0.0288 Ω; I = 240 / 0.0288 = 8,333 A
    # (= FLA 208.33 A × 100 / 2.5, common practice).
    z = transformer_impedance(50.0, 2.5, None, 240.0, False)
    assert_close(abs(z), 0.0288)
    assert_close(bolted_fault_ka(z, SPLIT), 8.3333, rel=1e-4)


def test_single_phase_with_conductors_by_hand() -> None:
    # Same transformer with X/R = 3 and 50 ft of 1/0 Cu in PVC on the secondary
    # (NFPA 70-2023 Ch. 9 Table 9, from memory: R = 0.12, XL = 0.044 Ω/1000 ft).
    # Z_T: R = 0.0288/√10 = 0.0091074, X = 0.0273221
    # conductor one way: (0.12 + j0.044) × 0.05 = 0.006 + j0.0022; loop: 2× = 0.012 + j0.0044
    # loop R = 0.0211074, X = 0.0317221, |Z| = 0.0381026 Ω → I = 240 / 0.0381026 = 6,298.8 A
    zt = transformer_impedance(50.0, 2.5, 3.0, 240.0, False)
    zc = feeder_impedance_ohm("1/0", "Cu", "pvc", 50.0, 1)
    loop = single_phase_loop_impedance(zt, z_conductors_one_way=zc)
    assert_close(loop.real, 0.0211074, rel=1e-5)
    assert_close(loop.imag, 0.0317221, rel=1e-5)
    assert_close(bolted_fault_ka(loop, SPLIT), 6.2988, rel=1e-4)


def test_finite_source_and_feeder_by_hand() -> None:
    # IEEE Std 141-1993 Ch. 4 ohmic method, worked by hand:
    # Source 480 V, 30 kA available, X/R 10: |Zs| = 480 / (√3 × 30,000) = 0.0092376 Ω
    #   R = 0.0092376 / √101 = 0.00091918, X = 10 R = 0.0091918
    # Feeder 200 ft, 2 sets of 500 kcmil Cu in steel (NFPA 70-2023 Table 9, from memory: R 0.029, XL 0.048):
    #   (0.029 + j0.048) × 0.2 / 2 = 0.0029 + j0.0048 Ω
    # Total R = 0.0038192, X = 0.0139918, |Z| = 0.0145036 Ω
    # I = 480 / (√3 × 0.0145036) = 19,107 A = 19.11 kA;  X/R = 0.0139918 / 0.0038192 = 3.664
    zs = source_impedance(480.0, 30.0, 10.0)
    assert_close(abs(zs), 0.0092376, rel=1e-5)
    assert_close(x_over_r(zs), 10.0)
    zf = feeder_impedance_ohm("500", "Cu", "steel", 200.0, 2)
    total = zs + zf
    assert_close(bolted_fault_ka(total, WYE480), 19.107, rel=1e-4)
    assert_close(x_over_r(total), 3.664, rel=1e-3)


def test_through_transformer_by_hand() -> None:
    # IEEE Std 141-1993 Ch. 4 ohmic method, worked by hand:
    # Utility 13.8 kV, 250 MVA (10.459 kA) X/R 15: Zs at 480 V = 480² / 250e6 = 0.0009216 Ω
    #   R = 0.0009216/√226 = 0.0000613, X = 0.0009196
    # Transformer 1500 kVA, 5.75 %Z, X/R 6: Zt = 0.0575 × 480² / 1.5e6 = 0.008832 Ω
    #   R = 0.008832/√37 = 0.0014520, X = 0.0087118
    # Total R = 0.0015133, X = 0.0096314, |Z| = 0.0097495 Ω → I = 480/(√3 × 0.0097495) = 28,425 A
    # X/R = 6.365
    zs_primary = source_impedance(13_800.0, 250e6 / (math.sqrt(3) * 13_800.0) / 1000.0, 15.0)
    zs = refer_impedance(zs_primary, 13_800.0, 480.0)
    assert_close(abs(zs), 0.0009216, rel=1e-6)
    zt = transformer_impedance(1500.0, 5.75, 6.0, 480.0, True)
    assert_close(abs(zt), 0.008832)
    total = zs + zt
    assert_close(bolted_fault_ka(total, WYE480), 28.425, rel=1e-4)
    assert_close(x_over_r(total), 6.365, rel=1e-3)


def test_x_over_r_propagation() -> None:
    # X/R of a series combination is ΣX / ΣR (common practice), not an average of the X/R values.
    a = source_impedance(480.0, 50.0, 20.0)
    b = transformer_impedance(750.0, 5.75, 5.0, 480.0, True)
    total = a + b
    assert_close(x_over_r(total), (a.imag + b.imag) / (a.real + b.real))
    assert min(x_over_r(a), x_over_r(b)) < x_over_r(total) < max(x_over_r(a), x_over_r(b))
    # Adding resistive cable lowers X/R.
    assert x_over_r(total + feeder_impedance_ohm("4/0", "Cu", "pvc", 100.0, 1)) < x_over_r(total)


def test_infinite_and_zero() -> None:
    assert source_impedance(480.0, None, 10.0) == 0j
    assert bolted_fault_ka(0j, WYE480) == math.inf
    assert x_over_r(0j) is None
    assert x_over_r(complex(0.0, 0.01)) is None


def test_bad_input_is_named() -> None:
    with pytest.raises(ValueError, match="fault current"):
        source_impedance(480.0, 0.0, None)
    with pytest.raises(ValueError, match="kVA"):
        transformer_impedance(0.0, 5.0, None, 480.0, True)
    with pytest.raises(ValueError, match="impedance"):
        transformer_impedance(75.0, 0.0, None, 480.0, True)


def test_refer_impedance_ratio_squared() -> None:
    # Z referred by (V_to/V_from)² (common practice); 480 → 208: × 0.18778.
    assert_close(abs(refer_impedance(1.0 + 0j, 480.0, 208.0)), (208 / 480) ** 2)


@given(
    fault_ka=st.floats(min_value=1.0, max_value=200.0),
    xr=st.one_of(st.none(), st.floats(min_value=0.1, max_value=50.0)),
    length=st.floats(min_value=0.0, max_value=2000.0),
)
def test_feeder_only_lowers_fault_current(fault_ka: float, xr: float | None, length: float) -> None:
    # Adding series impedance never raises the fault current; the source alone returns its own kA.
    zs = source_impedance(480.0, fault_ka, xr)
    assert_close(bolted_fault_ka(zs, WYE480), fault_ka, rel=1e-9)
    zf = feeder_impedance_ohm("3/0", "Cu", "steel", length, 1)
    assert bolted_fault_ka(zs + zf, WYE480) <= fault_ka * (1 + 1e-12)
