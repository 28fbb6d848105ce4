"""Voltage drop by the effective-impedance method of NFPA 70 Chapter 9 Table 9 Note 2.

Hand arithmetic uses the Table 9 values of NFPA 70-2023 (from memory); the exact phasor
drop is the independent cross-check of the approximation.
"""

from __future__ import annotations

import cmath
import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from server.calc import tables
from server.calc.model import Conduit, Material
from server.calc.systems import SQRT3, SYSTEMS
from server.calc.voltage_drop import (
    effective_z_ohm_per_kft,
    feeder_impedance_ohm,
    voltage_drop_pct,
    voltage_drop_v,
)
from tests.helpers import assert_close

WYE208 = SYSTEMS["208Y/120 3PH 4W"]
WYE480 = SYSTEMS["480Y/277 3PH 4W"]
SPLIT = SYSTEMS["120/240 1PH 3W"]
ONE120 = SYSTEMS["120 1PH 2W"]


def test_effective_z_3_0_cu_steel_by_hand() -> None:
    # NFPA 70-2023 Chapter 9 Table 9, 3/0 Cu in steel conduit: R = 0.079, XL = 0.052 Ω/1000 ft (from memory).
    # PF 0.85: sin θ = √(1 − 0.85²) = √0.2775 = 0.526783
    # Ze = 0.079 × 0.85 + 0.052 × 0.526783 = 0.067150 + 0.027393 = 0.094543 Ω/1000 ft
    assert_close(effective_z_ohm_per_kft("3/0", Material.CU, Conduit.STEEL, 0.85), 0.094543, rel=1e-5)


def test_three_phase_drop_by_hand() -> None:
    # Table 9 Note 2 method, NFPA 70-2023 (from memory): VD = √3 × I × Ze × L/1000
    # 150 A, 200 ft of 3/0 Cu in steel, PF 0.85, 208 V:
    # VD = 1.732051 × 150 × 0.094543 × 0.2 = 4.9126 V → 4.9126 / 208 = 2.3618 %
    kwargs = dict(current_a=150.0, length_ft=200.0, size="3/0", material="Cu", conduit="steel", sets=1, pf=0.85)
    assert_close(voltage_drop_v(**kwargs, system=WYE208), 4.9126, rel=1e-4)
    assert_close(voltage_drop_pct(**kwargs, system=WYE208), 2.3618, rel=1e-4)


def test_split_phase_and_two_wire_drop_by_hand() -> None:
    # 12 AWG Cu in PVC: R = 2.0, XL = 0.054 Ω/1000 ft (NFPA 70-2023 Ch. 9 Table 9, from memory); PF 1 → Ze = 2.0.
    # VD = 2 × 16 A × 2.0 × 100/1000 = 6.4 V (out and back).
    kwargs = dict(current_a=16.0, length_ft=100.0, size="12", material="Cu", conduit="pvc", sets=1, pf=1.0)
    assert_close(voltage_drop_v(**kwargs, system=SPLIT), 6.4)
    assert_close(voltage_drop_pct(**kwargs, system=SPLIT), 6.4 / 240 * 100)  # 2.667 % of 240 V
    assert_close(voltage_drop_pct(**kwargs, system=ONE120), 6.4 / 120 * 100)  # 5.333 % of 120 V


def test_feeder_impedance_parallel_sets() -> None:
    # 500 kcmil Cu in PVC: R = 0.027, XL = 0.039 Ω/1000 ft (NFPA 70-2023 Ch. 9 Table 9, from memory).
    # 250 ft, 2 sets: (0.027 + j0.039) × 0.25 / 2 = 0.003375 + j0.004875 Ω.
    z = feeder_impedance_ohm("500", Material.CU, Conduit.PVC, 250.0, 2)
    assert_close(z.real, 0.003375)
    assert_close(z.imag, 0.004875)


def test_aluminium_conduit_uses_pvc_reactance_and_own_resistance() -> None:
    # Table 9: XL column for PVC and aluminium conduit is shared; R differs (3/0 Cu: 0.077 PVC, 0.082 Al conduit).
    z_al = feeder_impedance_ohm("3/0", "Cu", "aluminum", 1000.0, 1)
    z_pvc = feeder_impedance_ohm("3/0", "Cu", "pvc", 1000.0, 1)
    assert z_al.imag == z_pvc.imag == 0.042
    assert (z_al.real, z_pvc.real) == (0.082, 0.077)


def test_sets_and_length_scale_drop() -> None:
    base = dict(current_a=400.0, size="500", material="Cu", conduit="steel", pf=0.9, system=WYE480)
    one = voltage_drop_pct(length_ft=100.0, sets=1, **base)
    assert_close(voltage_drop_pct(length_ft=100.0, sets=2, **base), one / 2)
    assert_close(voltage_drop_pct(length_ft=300.0, sets=1, **base), one * 3)
    assert voltage_drop_pct(length_ft=0.0, sets=1, **base) == 0.0


def test_rejects_unknown_rows_and_bad_input() -> None:
    with pytest.raises(ValueError, match="no Al row"):
        feeder_impedance_ohm("14", "Al", "pvc", 100.0, 1)
    with pytest.raises(ValueError, match="sets"):
        feeder_impedance_ohm("12", "Cu", "pvc", 100.0, 0)
    with pytest.raises(ValueError, match="power factor"):
        effective_z_ohm_per_kft("12", "Cu", "pvc", 1.2)


@pytest.mark.parametrize("size", ["6", "1/0", "4/0", "350", "750"])
@pytest.mark.parametrize("pf", [0.8, 0.9, 1.0])
def test_effective_z_close_to_exact_phasor_drop(size: str, pf: float) -> None:
    # Cross-check of the Note 2 approximation against the exact phasor solution (common practice: the
    # approximation is within a few percent of the drop when the drop is a few percent of the voltage).
    # Exact: Vs = Vr + I·Z per phase, with |Vs| = 277 V fixed; drop = |Vs| − |Vr|.
    current = 0.8 * tables.ampacity_a(size, Material.CU, 75)
    length = 150.0
    z = feeder_impedance_ohm(size, Material.CU, Conduit.STEEL, length, 1)
    i = cmath.rect(current, -math.acos(pf))
    # Solve |Vr + I·Z| = 277 for real Vr (receiving end on the reference axis).
    iz = i * z
    vr = -iz.real + math.sqrt(277.0**2 - iz.imag**2)
    exact_pct = (277.0 - vr) / 277.0 * 100
    approx = voltage_drop_pct(
        current_a=current, length_ft=length, size=size, material="Cu", conduit="steel", sets=1, pf=pf, system=WYE480
    )
    assert exact_pct > 0
    assert_close(approx, exact_pct, rel=0.02)


@given(pf=st.floats(min_value=0.7, max_value=1.0), conduit=st.sampled_from(list(Conduit)))
def test_larger_conductor_never_drops_more(pf: float, conduit: Conduit) -> None:
    # NFPA 70 Ch. 9 Table 9 (from memory): at usual power factors Ze falls as the size grows.
    sizes = tables.conductor_sizes()
    values = [effective_z_ohm_per_kft(s, Material.CU, conduit, pf) for s in sizes]
    assert all(b <= a + 1e-12 for a, b in zip(values, values[1:], strict=False))


def test_three_phase_multiplier_is_sqrt3() -> None:
    kwargs = dict(current_a=10.0, length_ft=1000.0, size="10", material="Cu", conduit="pvc", sets=1, pf=1.0)
    assert_close(voltage_drop_v(**kwargs, system=WYE208), SQRT3 * 10.0 * 1.2)


@pytest.mark.parametrize(("size", "pf"), [("3/0", 0.85), ("500", 0.9), ("4", 1.0)])
def test_three_phase_drop_matches_opendss(size: str, pf: float) -> None:
    # Reference library (team rule): OpenDSS via opendssdirect.py.  A 480 V stiff source feeds a
    # constant-current balanced load through a line with Table 9 R and XL (NFPA 70-2023, from memory)
    # as positive- and zero-sequence impedance; OpenDSS's |Vs| − |Vr| must match the Note 2 estimate.
    dss = pytest.importorskip("opendssdirect")
    row = tables.table9()[size]
    r, x = row.resistance(Material.CU, Conduit.STEEL), row.reactance(Conduit.STEEL)
    current = 0.8 * tables.ampacity_a(size, Material.CU, 75)
    length_ft = 200.0
    dss.Text.Command("clear")
    dss.Text.Command("new circuit.vdcheck basekv=0.48 pu=1.0 phases=3 bus1=src MVAsc3=1e9 MVAsc1=1e9")
    dss.Text.Command(
        f"new line.f1 bus1=src bus2=ld phases=3 r1={r} x1={x} r0={r} x0={x} c1=0 c0=0 "
        f"length={length_ft / 1000} units=kft"
    )
    kva = SQRT3 * 0.48 * current
    dss.Text.Command(f"new load.l1 bus1=ld phases=3 kv=0.48 kva={kva} pf={pf} model=5 vminpu=0.5")
    dss.Text.Command("set voltagebases=[0.48]")
    dss.Text.Command("calcvoltagebases")
    dss.Solution.Solve()
    dss.Circuit.SetActiveBus("src")
    vs = dss.Bus.puVmagAngle()[0]
    dss.Circuit.SetActiveBus("ld")
    vr = dss.Bus.puVmagAngle()[0]
    reference_pct = (vs - vr) * 100
    approx = voltage_drop_pct(
        current_a=current, length_ft=length_ft, size=size, material="Cu", conduit="steel", sets=1, pf=pf, system=WYE480
    )
    assert_close(approx, reference_pct, rel=0.02)
