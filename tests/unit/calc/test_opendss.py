"""Cross-check of currents and voltage drop against OpenDSS (opendssdirect.py, the reference library).

Source of the reference values: OpenDSS (opendssdirect.py <version printed in the test ids>),
solving each test panel as constant-power loads (Load model=1) on a very stiff source (source
impedance 1 µΩ), so every load sits at its nominal voltage and draws S/V exactly as the engine
assumes.  Line currents come from the source terminals, the neutral current from the phasor
sum of OpenDSS's own line-to-neutral load currents.  Tolerance 0.5 % (the solved voltages
differ from nominal by far less than that).

High-leg 240/120 V delta and 120/240 V split-phase are built from single-phase voltage
sources on a common neutral node (A 120∠0°, B 207.8∠−90°, C 120∠180° for the high leg;
A 120∠0°, B 120∠180° for split-phase), which is exactly the phasor set of server.calc.systems.

Transformers: delta–wye, grounded wye–wye and a centre-tapped single-phase bank across two
lines (OpenDSS's 3-winding model), each with negligible impedance; the engine's primary line
currents against OpenDSS's source currents, same 0.5 % tolerance.

Feeder rotation: two panels on a delta–wye bank's secondary, one with its feeder landed rotated;
OpenDSS gets each load on the secondary node it is really wired to; the engine's secondary and
primary line currents against OpenDSS's transformer terminal currents, same 0.5 % tolerance.

Voltage drop: a 3-phase feeder modelled as an OpenDSS Line with NFPA 70 Chapter 9 Table 9
R and X per 1000 ft (the values the engine uses), feeding a balanced constant-power load.  The
engine's effective-impedance method (Table 9 Note 2: VD ≈ √3·I·(R cos θ + X sin θ)·L) drops the
second-order term of the exact phasor drop, so agreement within 5 % (relative) of the drop is
the expected accuracy for drops of a few percent.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import replace

import pytest

opendss = pytest.importorskip("opendssdirect")
dss = opendss

from server.calc.engine import compute_project  # noqa: E402
from server.calc.model import (  # noqa: E402
    Category,
    Circuit,
    Conduit,
    Material,
    Panel,
    Project,
    ProjectInfo,
    Source,
    Transformer,
)
from server.calc.systems import SYSTEMS, breaker_phases  # noqa: E402
from server.calc.voltage_drop import feeder_impedance_ohm, voltage_drop_pct  # noqa: E402
from tests.helpers import assert_close  # noqa: E402

VERSION = getattr(opendss, "__version__", "unknown")
SOURCE = f"OpenDSS (opendssdirect.py {VERSION})"
NODE = {"A": 1, "B": 2, "C": 3}
STIFF = "Z1=[0.000001,0.000001] Z0=[0.000001,0.000001]"


def _cmd(*lines: str) -> None:
    for line in lines:
        dss.Text.Command(line)


def _source(system: str) -> None:
    spec = SYSTEMS[system]
    _cmd("clear")
    if spec.kind.value in ("wye", "delta"):
        _cmd(f"New Circuit.t bus1=src phases=3 basekv={spec.v_ll / 1000:.9f} pu=1.0 {STIFF}")
        return
    # Single-phase sources on a common neutral (node 0): one per line, at that line's phasor.
    first = True
    for p in spec.phases:
        v = spec.phase_voltage(p)
        what = "Circuit.t" if first else f"Vsource.v{p}"
        _cmd(
            f"New {what} bus1=src.{NODE[p]} phases=1 basekv={abs(v) / 1000:.9f} pu=1.0 "
            f"angle={math.degrees(cmath.phase(v)):.9f} {STIFF}"
        )
        first = False


def _element_currents(name: str) -> list[complex]:
    dss.Circuit.SetActiveElement(name)
    c = dss.CktElement.Currents()
    return [complex(c[i], c[i + 1]) for i in range(0, len(c), 2)]


def _solve(system: str, circuits: list[Circuit]) -> tuple[dict[str, float], float]:
    """OpenDSS line currents (A) and neutral current (A) of a panel's loads."""
    spec = SYSTEMS[system]
    _source(system)
    ln_loads: list[str] = []
    for c in circuits:
        phases = breaker_phases(spec, c.slot, c.poles)
        kva = (c.va or 0.0) / 1000.0
        pf = c.effective_pf
        name = f"Load.s{c.slot}"
        if c.poles == 1:
            _cmd(
                f"New {name} bus1=src.{NODE[phases[0]]} phases=1 kV={abs(spec.phase_voltage(phases[0])) / 1000:.9f} "
                f"kVA={kva} pf={pf} model=1 conn=wye vminpu=0.5 vmaxpu=1.5"
            )
            ln_loads.append(name)
        elif c.poles == 2:
            _cmd(
                f"New {name} bus1=src.{NODE[phases[0]]}.{NODE[phases[1]]} phases=1 kV={spec.v_ll / 1000:.9f} "
                f"kVA={kva} pf={pf} model=1 vminpu=0.5 vmaxpu=1.5"
            )
        else:
            _cmd(
                f"New {name} bus1=src.1.2.3 phases=3 conn=delta kV={spec.v_ll / 1000:.9f} "
                f"kVA={kva} pf={pf} model=1 vminpu=0.5 vmaxpu=1.5"
            )
    _cmd(f"Set voltagebases=[{spec.v_ll / 1000:.9f}]", "Calcvoltagebases", "Solve")
    assert dss.Solution.Converged()
    lines: dict[str, complex] = {p: 0j for p in spec.phases}
    if spec.kind.value in ("wye", "delta"):
        terminal = _element_currents("Vsource.source")
        for p in spec.phases:
            lines[p] = -terminal[NODE[p] - 1]  # current into the source terminal = minus the line current
    else:
        for i, p in enumerate(spec.phases):
            lines[p] = -_element_currents("Vsource.source" if i == 0 else f"Vsource.v{p}")[0]
    neutral = sum((_element_currents(n)[0] for n in ln_loads), 0j)
    return {p: abs(i) for p, i in lines.items()}, abs(neutral)


def _engine(system: str, circuits: list[Circuit]):
    project = Project(
        ProjectInfo(name="OpenDSS cross-check (invented)"),
        sources=(Source("S", system),),
        panels=(Panel("P", system, fed_from="S", spaces=42, circuits=tuple(circuits)),),
    )
    return compute_project(project).panels["P"]


def c(slot: int, poles: int, va: float, pf: float) -> Circuit:
    return Circuit(slot=slot, poles=poles, category=Category.EQUIPMENT, va=va, pf=pf)


PANELS = {
    "balanced 208Y/120": (
        "208Y/120 3PH 4W",
        [c(1, 1, 5_000, 0.9), c(3, 1, 5_000, 0.9), c(5, 1, 5_000, 0.9), c(2, 3, 20_000, 0.85)],
    ),
    "unbalanced 480Y/277 with line-to-line loads": (
        "480Y/277 3PH 4W",
        [c(1, 1, 8_000, 0.95), c(3, 2, 12_000, 0.8), c(2, 1, 3_000, 1.0), c(6, 2, 6_000, 0.9), c(9, 1, 4_000, 0.7)],
    ),
    "single load 208Y/120": ("208Y/120 3PH 4W", [c(3, 1, 2_000, 0.9)]),
    "split-phase 120/240": ("120/240 1PH 3W", [c(1, 1, 1_500, 0.95), c(3, 1, 800, 0.9), c(2, 2, 4_800, 0.85)]),
    "high-leg 240/120 delta": (
        "240/120 3PH 4W",
        [c(1, 1, 1_800, 0.9), c(11, 1, 1_200, 1.0), c(3, 2, 3_000, 0.8), c(2, 3, 9_000, 0.85), c(8, 2, 2_000, 0.9)],
    ),
    "delta 480 3-wire": ("480 3PH 3W", [c(1, 2, 10_000, 0.9), c(5, 2, 4_000, 0.8), c(2, 3, 30_000, 0.85)]),
}


@pytest.mark.parametrize("case", list(PANELS), ids=lambda name: f"{name} vs {SOURCE}")
def test_line_and_neutral_currents_match_opendss(case: str) -> None:
    system, circuits = PANELS[case]
    ref_lines, ref_neutral = _solve(system, circuits)
    ours = _engine(system, circuits)
    for p, amps in ref_lines.items():
        assert_close(ours.line_amps[p], amps, rel=0.005, abs_=1e-6, what=f"{case} line {p} ({SOURCE})")
    if ours.neutral_amps is None:
        assert not SYSTEMS[system].has_neutral
    else:
        assert_close(ours.neutral_amps, ref_neutral, rel=0.005, abs_=1e-3, what=f"{case} neutral ({SOURCE})")


def test_three_phase_feeder_voltage_drop_matches_opendss() -> None:
    system = "480Y/277 3PH 4W"
    spec = SYSTEMS[system]
    size, material, conduit, length_ft, pf, kva = "250", Material.CU, Conduit.STEEL, 400.0, 0.85, 250.0
    z_kft = feeder_impedance_ohm(size, material, conduit, 1000.0, 1)  # Table 9 ohms to neutral per 1000 ft
    _source(system)
    _cmd(
        f"New Line.f bus1=src bus2=ld phases=3 units=kft length={length_ft / 1000} "
        f"R1={z_kft.real} X1={z_kft.imag} R0={z_kft.real} X0={z_kft.imag} C1=0 C0=0",
        f"New Load.l bus1=ld phases=3 conn=wye kV={spec.v_ll / 1000:.9f} kVA={kva} pf={pf} model=1",
        f"Set voltagebases=[{spec.v_ll / 1000:.9f}]",
        "Calcvoltagebases",
        "Solve",
    )
    assert dss.Solution.Converged()
    dss.Circuit.SetActiveBus("src")
    v_src = abs(complex(*dss.Bus.Voltages()[0:2]))
    dss.Circuit.SetActiveBus("ld")
    v_ld = abs(complex(*dss.Bus.Voltages()[0:2]))
    ref_pct = 100.0 * (v_src - v_ld) / v_src
    current = abs(_element_currents("Line.f")[0])
    ours = voltage_drop_pct(
        current_a=current,
        length_ft=length_ft,
        size=size,
        material=material,
        conduit=conduit,
        sets=1,
        pf=pf,
        system=spec,
    )
    assert 1.0 < ref_pct < 5.0  # a realistic feeder drop, where the approximation is meant to be used
    assert_close(ours, ref_pct, rel=0.05, what=f"effective-Z voltage drop vs {SOURCE}")


# Transformers: ideal banks (0.00001 % R and X, no magnetising current) on the stiff source; the
# engine's primary line currents against OpenDSS's source terminal currents.
TRANSFORMERS = {
    "delta-wye 480–208Y/120": (
        "480Y/277 3PH 4W",
        {"primary": "480 3PH 3W", "secondary": "208Y/120 3PH 4W", "kva": 75},
        "New Transformer.x phases=3 windings=2 buses=[src, sec] conns=[delta, wye] kVs=[{vp}, {vs}] kVAs=[75, 75] "
        "%Rs=[0.00001, 0.00001] XHL=0.00001 %noloadloss=0 %imag=0",
        [c(1, 1, 12_000, 1.0), c(3, 2, 5_000, 0.8), c(2, 1, 3_000, 0.9)],
    ),
    "wye-wye 480Y/277–208Y/120": (
        "480Y/277 3PH 4W",
        {"primary": "480Y/277 3PH 4W", "secondary": "208Y/120 3PH 4W", "kva": 75},
        "New Transformer.x phases=3 windings=2 buses=[src, sec] conns=[wye, wye] kVs=[{vp}, {vs}] kVAs=[75, 75] "
        "%Rs=[0.00001, 0.00001] XHL=0.00001 %noloadloss=0 %imag=0",
        [c(1, 1, 12_000, 1.0), c(3, 2, 5_000, 0.8)],
    ),
    "single-phase 480–120/240 on A–B": (
        "480Y/277 3PH 4W",
        {"primary": "480 3PH 3W", "secondary": "120/240 1PH 3W", "kva": 50},
        "New Transformer.x phases=1 windings=3 buses=[src.1.2, sec.1.0, sec.0.2] kVs=[{vp}, 0.12, 0.12] "
        "kVAs=[50, 25, 25] %Rs=[0.00001, 0.00001, 0.00001] XHL=0.00001 XHT=0.00001 XLT=0.00001 %noloadloss=0 %imag=0",
        [c(1, 2, 24_000, 1.0), c(4, 1, 2_400, 0.9)],
    ),
}


@pytest.mark.parametrize("case", list(TRANSFORMERS), ids=lambda name: f"{name} vs {SOURCE}")
def test_transformer_primary_currents_match_opendss(case: str) -> None:
    system, xf, bank, circuits = TRANSFORMERS[case]
    pri, sec = SYSTEMS[system], SYSTEMS[xf["secondary"]]
    _source(system)
    _cmd(bank.format(vp=f"{pri.v_ll / 1000:.9f}", vs=f"{sec.v_ll / 1000:.9f}"))
    for circuit in circuits:
        phases = breaker_phases(sec, circuit.slot, circuit.poles)
        nodes = ".".join(str(NODE[p]) for p in phases)
        kv = (sec.v_ll if circuit.poles == 2 else abs(sec.phase_voltage(phases[0]))) / 1000
        _cmd(
            f"New Load.s{circuit.slot} bus1=sec.{nodes} phases=1 kV={kv:.9f} kVA={(circuit.va or 0) / 1000} "
            f"pf={circuit.effective_pf} model=1"
        )
    _cmd(f"Set voltagebases=[{pri.v_ll / 1000:.9f}, {sec.v_ll / 1000:.9f}]", "Calcvoltagebases", "Solve")
    assert dss.Solution.Converged()
    terminal = _element_currents("Vsource.source")
    feeds = 3 if sec.three_phase else 2
    project = Project(
        ProjectInfo(name="OpenDSS transformer cross-check (invented)"),
        sources=(Source("S", system),),
        transformers=(Transformer("X", kva=xf["kva"], primary=xf["primary"], secondary=xf["secondary"]),),
        panels=(
            Panel("D", system, fed_from="S", circuits=(Circuit(slot=1, poles=feeds, feeds="X"),)),
            Panel("P", xf["secondary"], fed_from="X", circuits=tuple(circuits)),
        ),
    )
    ours = compute_project(project).transformers["X"].primary_line_amps
    for p in pri.phases:
        assert_close(ours.get(p, 0.0), abs(terminal[NODE[p] - 1]), rel=0.005, abs_=1e-6, what=f"{case} {p} ({SOURCE})")


# Feeder rotation: a delta–wye 480–208Y/120 bank (ideal, as above) whose secondary feeds two
# panels; P2's feeder is landed rotated (feeder_rotation=1: P2's A on the secondary's B, B on C,
# C on A).  OpenDSS simply sees every load on the secondary node it is really connected to, so
# its secondary currents are an outside check of the engine's relabelling and phasor turn.
ROTATED_P1 = [c(1, 1, 9_000, 0.9), c(3, 1, 2_500, 0.8), c(2, 1, 4_000, 1.0), c(4, 2, 6_000, 0.85)]
ROTATED_P2 = [c(1, 1, 7_000, 0.7), c(3, 1, 1_500, 1.0), c(5, 1, 3_000, 0.95), c(2, 2, 5_000, 0.8)]


@pytest.mark.parametrize("rotation", [0, 1, 2], ids=lambda r: f"P2 feeder_rotation={r} vs {SOURCE}")
def test_rotated_panel_secondary_currents_match_opendss(rotation: int) -> None:
    system, secondary = "480Y/277 3PH 4W", "208Y/120 3PH 4W"
    pri, sec = SYSTEMS[system], SYSTEMS[secondary]
    order = ("A", "B", "C")
    _source(system)
    _cmd(
        "New Transformer.x phases=3 windings=2 buses=[src, sec] conns=[delta, wye] "
        f"kVs=[{pri.v_ll / 1000:.9f}, {sec.v_ll / 1000:.9f}] kVAs=[150, 150] "
        "%Rs=[0.00001, 0.00001] XHL=0.00001 %noloadloss=0 %imag=0"
    )
    for tag, circuits, r in (("p1", ROTATED_P1, 0), ("p2", ROTATED_P2, rotation)):
        for circuit in circuits:
            own = breaker_phases(sec, circuit.slot, circuit.poles)
            landed = [order[(order.index(p) + r) % 3] for p in own]  # where the installer landed them
            nodes = ".".join(str(NODE[p]) for p in landed)
            kv = (sec.v_ll if circuit.poles == 2 else abs(sec.phase_voltage(own[0]))) / 1000
            _cmd(
                f"New Load.{tag}s{circuit.slot} bus1=sec.{nodes} phases=1 kV={kv:.9f} "
                f"kVA={(circuit.va or 0) / 1000} pf={circuit.effective_pf} model=1"
            )
    _cmd(f"Set voltagebases=[{pri.v_ll / 1000:.9f}, {sec.v_ll / 1000:.9f}]", "Calcvoltagebases", "Solve")
    assert dss.Solution.Converged()
    winding = _element_currents("Transformer.x")  # terminal 1 (4 conductors), then terminal 2
    ref_secondary = {p: abs(winding[4 + NODE[p] - 1]) for p in order}
    ref_primary = {p: abs(winding[NODE[p] - 1]) for p in order}
    project = Project(
        ProjectInfo(name="OpenDSS feeder-rotation cross-check (invented)"),
        sources=(Source("S", system),),
        transformers=(Transformer("X", kva=150, primary="480 3PH 3W", secondary=secondary),),
        panels=(
            Panel("D", system, fed_from="S", circuits=(Circuit(slot=1, poles=3, feeds="X"),)),
            Panel("P1", secondary, fed_from="X", circuits=tuple(ROTATED_P1)),
            Panel("P2", secondary, fed_from="X", circuits=tuple(ROTATED_P2), feeder_rotation=rotation),
        ),
    )
    result = compute_project(project)
    ours = result.transformers["X"]
    for p in order:
        what = f"secondary line {p}, P2 rotation {rotation} ({SOURCE})"
        assert_close(ours.secondary_line_amps[p], ref_secondary[p], rel=0.005, abs_=1e-6, what=what)
        what = f"primary line {p}, P2 rotation {rotation} ({SOURCE})"
        assert_close(ours.primary_line_amps[p], ref_primary[p], rel=0.005, abs_=1e-6, what=what)
    # P2's own results do not depend on how its feeder is landed.
    panels = tuple(replace(p, feeder_rotation=0) if p.tag == "P2" else p for p in project.panels)
    unrotated = compute_project(replace(project, panels=panels)).panels["P2"]
    assert result.panels["P2"].line_amps == unrotated.line_amps
    assert result.panels["P2"].connected_va == unrotated.connected_va
