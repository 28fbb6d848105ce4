"""Loads and currents: per-phase connected VA, phasor line currents, neutral current, imbalance,
and the reflection of line currents through a transformer's windings.

Load model (common practice for panel schedules): every load is a constant-power load at the
nominal voltage of its connection with a lagging power factor, so its complex power is
``S = VA · (pf + j·sin φ)`` and its current ``I = conj(S / V)``:

* 1-pole: line-to-neutral at V_LN of its phase (the current returns on the neutral);
* 2-pole: line-to-line between its two phases, ``V_pq = V_p − V_q`` (the 30° shifts fall out of
  the phasors of :mod:`server.calc.systems`); the current leaves on p and returns on q;
* 3-pole: balanced three-phase, modelled as three equal line-to-line loads of S/3 on AB, BC
  and CA.  That is exact for a balanced load on wye, delta and high-leg delta alike, because
  a balanced load draws the same line currents whatever its own connection.

Per-phase connected VA follows the trade convention instead (1-pole on its phase, 2-pole half
on each, 3-pole a third on each): that is what a panel schedule shows and what balancing uses.

Currents are plain Python complex numbers in amperes; voltages in volts; power in VA.
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Iterable, Mapping
from functools import lru_cache

from .errors import CalcError
from .systems import SQRT3, SystemKind, SystemSpec, breaker_phases

#: e^{−j30°}: the ANSI standard angular displacement (the low-voltage side lags the
#: high-voltage side by 30° in delta–wye and wye–delta banks, IEEE C57.12.00 / C57.12.70).
_LAG30 = cmath.rect(1.0, math.radians(-30.0))
_DELTA_KINDS = (SystemKind.DELTA, SystemKind.HIGH_LEG)

Coefficients = tuple[tuple[str, complex], ...]


def _ln_circuit(spec: SystemSpec, phase: str) -> Coefficients:
    return ((phase, 1.0 / spec.phase_voltage(phase).conjugate()),)


def _ll_pairs(spec: SystemSpec, phases: tuple[str, ...]) -> list[tuple[str, str, float]]:
    """Line-to-line elements (p, q, share of S) of a 2- or 3-pole breaker."""
    if len(phases) == 2:
        return [(phases[0], phases[1], 1.0)]
    a, b, c = spec.phases  # balanced: S/3 on AB, BC and CA whatever the pole order
    return [(a, b, 1.0 / 3.0), (b, c, 1.0 / 3.0), (c, a, 1.0 / 3.0)]


@lru_cache(maxsize=4096)
def current_coefficients(spec: SystemSpec, slot: int, poles: int) -> Coefficients:
    """Per-phase coefficients k_p with I_p = conj(S) · k_p for a breaker at ``slot``.

    ``conj(S) = VA · (pf − j·sin φ)``; for a line-to-neutral load ``k_p = 1/conj(V_p)``; for a
    line-to-line load between p and q ``k_p = +1/conj(V_pq)`` and ``k_q = −1/conj(V_pq)``.
    Cached per (system, slot, poles): the phasors of a slot never change.
    """
    phases = breaker_phases(spec, slot, poles)
    if poles <= 1:
        return _ln_circuit(spec, phases[0])
    acc: dict[str, complex] = {}
    for p, q, share in _ll_pairs(spec, phases):
        k = share / spec.line_voltage(p, q).conjugate()
        acc[p] = acc.get(p, 0j) + k
        acc[q] = acc.get(q, 0j) - k
    return tuple((p, acc[p]) for p in phases)


def conj_power(va: float, pf: float) -> complex:
    """conj(S) of a lagging load: VA · (pf − j·sin φ)."""
    return complex(va * pf, -va * math.sqrt(max(0.0, 1.0 - pf * pf)))


def circuit_currents(spec: SystemSpec, slot: int, poles: int, va: float, pf: float) -> dict[str, complex]:
    """Phasor line currents (A) of one load of ``va`` VA at power factor ``pf`` (lagging)."""
    s_conj = conj_power(va, pf)
    return {p: s_conj * k for p, k in current_coefficients(spec, slot, poles)}


@lru_cache(maxsize=4096)
def phase_shares(spec: SystemSpec, slot: int, poles: int) -> tuple[tuple[str, float], ...]:
    """Trade-convention share of a breaker's VA on each of its phases (1/poles each)."""
    phases = breaker_phases(spec, slot, max(poles, 1))
    share = 1.0 / len(phases)
    return tuple((p, share) for p in phases)


def circuit_phase_va(spec: SystemSpec, slot: int, poles: int, va: float) -> dict[str, float]:
    """Trade convention: a 1-pole load on its phase, a 2-pole load half on each, 3-pole a third each."""
    out: dict[str, float] = {}
    for p, share in phase_shares(spec, slot, poles):
        out[p] = out.get(p, 0.0) + va * share
    return out


def load_amps(spec: SystemSpec, poles: int, va: float) -> float:
    """Magnitude of a load's line current: VA/V_LN (1-pole), VA/V_LL (2-pole), VA/(√3·V_LL) (3-pole).

    For a 2-pole load on a 3-phase system V_LL is the line-to-line voltage; on split-phase it is
    the 240 V across both lines.
    """
    if poles <= 1:
        v = spec.v_ln if spec.v_ln else spec.v_ll
        return va / v
    if poles == 2:
        return va / spec.v_ll
    return va / (SQRT3 * spec.v_ll)


@lru_cache(maxsize=64)
def triplen_rotation(spec: SystemSpec, phase: str) -> complex:
    """e^{j·3θ} for the phase-to-neutral voltage angle θ of ``phase``.

    Third-harmonic currents of loads with the same waveform sit at three times their phase's
    voltage angle.  On a three-phase wye (0°, −120°, +120°) that is 0°, −360°, +360°: they add
    in phase on the neutral (arithmetic sum).  On split-phase and on the 120 V winding of a
    high-leg delta (0° and 180°) it is 0° and 540° ≡ 180°: they cancel like the fundamental.
    """
    v = spec.phase_voltage(phase)
    return cmath.rect(1.0, 3.0 * cmath.phase(v))


def neutral_current(fundamental: complex, triplen: complex) -> float:
    """Neutral current (A): I_N = sqrt(|I_N1|² + |I_N3|²).

    ``fundamental`` is the phasor sum of the line-to-neutral load currents (equal to the sum of
    the line currents, since line-to-line currents cancel); ``triplen`` the phasor sum of their
    third-harmonic currents (see :func:`triplen_rotation`).  Harmonics of different order are
    orthogonal, so their RMS values add in quadrature.
    """
    return math.hypot(abs(fundamental), abs(triplen))


def neutral_from_loads(loads: Iterable[tuple[complex, float, complex]]) -> float:
    """Neutral current of line-to-neutral loads given as (current phasor, harmonic3 %, triplen rotation)."""
    n1 = 0j
    n3 = 0j
    for i, h3_pct, rot in loads:
        n1 += i
        n3 += abs(i) * h3_pct / 100.0 * rot
    return neutral_current(n1, n3)


def imbalance_pct(phase_va: Mapping[str, float]) -> float:
    """100 × max|S_p − S_avg| / S_avg over per-phase connected VA; 0 for an empty panel or one phase."""
    values = list(phase_va.values())
    if len(values) < 2:
        return 0.0
    avg = sum(values) / len(values)
    if avg <= 0.0:
        return 0.0
    return 100.0 * max(abs(v - avg) for v in values) / avg


def orientation(spec: SystemSpec) -> complex:
    """Rotation from the standard orientation (V_AB at +30°) to this system's own phasors.

    Wye, delta (virtual star) and split/single-phase use the standard orientation (1); the
    high-leg delta of :mod:`server.calc.systems` puts V_AB at +60°, so e^{+j30°}.
    """
    if not spec.three_phase:
        return 1 + 0j
    v_ab = spec.line_voltage("A", "B")
    return cmath.rect(1.0, cmath.phase(v_ab) - math.radians(30.0))


def winding_connection(spec: SystemSpec) -> str:
    """How a transformer winding on ``spec`` is connected: 'delta', 'wye' or 'single'.

    The system string of a transformer side states its winding: ``480 3PH 3W`` is a delta
    primary, ``480Y/277 3PH 4W`` a wye primary, ``240/120 3PH 4W`` a centre-tapped delta.
    """
    if not spec.three_phase:
        return "single"
    return "delta" if spec.kind in _DELTA_KINDS else "wye"


def winding_ratio(secondary: SystemSpec, primary: SystemSpec, primary_phases: tuple[str, ...]) -> float:
    """Turns ratio n of the model used by :func:`reflect_through_transformer`."""
    pri, sec = winding_connection(primary), winding_connection(secondary)
    if sec == "single":
        if len(primary_phases) >= 2:
            v = abs(primary.line_voltage(primary_phases[0], primary_phases[1]))
        else:
            v = abs(primary.phase_voltage(primary_phases[0]))
        return v / secondary.v_ll
    if pri == "delta" and sec == "wye":
        return primary.v_ll / (secondary.v_ln or secondary.v_ll)
    if pri == "wye" and sec == "wye":
        return (primary.v_ln or primary.v_ll) / (secondary.v_ln or secondary.v_ll)
    if pri == "delta":  # delta–delta
        return primary.v_ll / secondary.v_ll
    return (primary.v_ln or primary.v_ll) / secondary.v_ll  # wye–delta


def reflect_through_transformer(
    secondary: SystemSpec,
    primary: SystemSpec,
    sec_currents: Mapping[str, complex],
    primary_phases: tuple[str, ...],
) -> dict[str, complex]:
    """Primary line currents (A) of a transformer from its secondary line currents.

    Secondary phasors are in the secondary's own reference; the result is in the primary's.
    Winding model (ideal transformer; magnetising current neglected):

    * Three-phase banks connect phase for phase (H1–H2–H3 on the primary's A–B–C, the feeding
      breaker's pole order does not matter); ``primary_phases`` must then be all three phases.
    * Delta primary / wye secondary, ANSI (LV lags HV by 30°), n = V_LL,pri / V_LN,sec:
      I_A = (I_a − I_b)/n · e^{−j30°}, I_B = (I_b − I_c)/n · e^{−j30°}, I_C = (I_c − I_a)/n · e^{−j30°}.
      Zero-sequence current circulates in the delta and never reaches the primary lines.
    * Wye–wye (grounded, zero sequence passes), n = V_LN ratio: I_A = I_a/n.
    * Wye primary (neutral not connected) / delta secondary, ANSI, n = V_LN,pri / V_LL,sec:
      I_A = (I_a − I_b)/(3n) · e^{−j30°} (the floating primary star forces the delta's circulating
      current to zero).
    * Delta–delta, n = V_LL ratio: I_A = I_a/n (line currents of a delta sum to zero, the
      circulating current cancels in the line currents).
    * A centre-tapped (high-leg) delta secondary: a line-to-neutral load of current I on a or c
      flows in half of winding c–a, which in ampere-turns is I/2 in the whole winding, i.e. an
      equivalent line-to-line current I/2 from that line to the other end of the winding.  So
      with I_n = I_a + I_b + I_c: I_a′ = I_a − I_n/2, I_c′ = I_c − I_n/2, I_b′ = I_b (a zero-sum
      set) is what the windings transform.
    * Single-phase transformer (secondary 1PH 3W or 1PH 2W) fed from primary lines p, q:
      n = |V_pq| / V_LL,sec; I_p = (I_a − I_b)/(2n) for split-phase (each half winding carries
      its own line-to-neutral load), I_p = I_a/n for 2-wire; I_q = −I_p; rotated to the angle of
      V_pq.  Fed from one line p and the neutral: n = |V_p| / V_sec and I_p alone (returning on
      the primary neutral).
    """
    sec_kind, pri_kind = winding_connection(secondary), winding_connection(primary)
    n = winding_ratio(secondary, primary, primary_phases)
    if sec_kind == "single":
        if secondary.kind == SystemKind.SPLIT:
            i = (sec_currents.get("A", 0j) - sec_currents.get("B", 0j)) / (2.0 * n)
        else:
            i = sec_currents.get("A", 0j) / n
        if len(primary_phases) >= 2:
            p, q = primary_phases[0], primary_phases[1]
            unit = primary.line_voltage(p, q)
            i *= unit / abs(unit)
            return {p: i, q: -i}
        p = primary_phases[0]
        unit = primary.phase_voltage(p)
        return {p: i * unit / abs(unit)}
    if pri_kind == "single":
        raise ValueError("a three-phase secondary needs a three-phase primary")
    to_std = orientation(secondary).conjugate()
    a = sec_currents.get("A", 0j) * to_std
    b = sec_currents.get("B", 0j) * to_std
    c = sec_currents.get("C", 0j) * to_std
    if secondary.kind == SystemKind.HIGH_LEG:
        half_n = (a + b + c) / 2.0
        a -= half_n
        c -= half_n
    if pri_kind == "delta" and sec_kind == "wye":
        k = _LAG30 / n
        out = ((a - b) * k, (b - c) * k, (c - a) * k)
    elif pri_kind == "wye" and sec_kind == "wye":
        out = (a / n, b / n, c / n)
    elif pri_kind == "delta":
        out = (a / n, b / n, c / n)
    else:
        k = _LAG30 / (3.0 * n)
        out = ((a - b) * k, (b - c) * k, (c - a) * k)
    back = orientation(primary)
    return {"A": out[0] * back, "B": out[1] * back, "C": out[2] * back}


def triplens_pass(secondary: SystemSpec, primary: SystemSpec) -> bool:
    """Whether third-harmonic (zero-sequence) currents reach the primary lines.

    They stay inside a delta winding; they pass a grounded wye–wye bank and a single-phase
    transformer (whose one winding carries the whole secondary waveform).
    """
    sec_kind, pri_kind = winding_connection(secondary), winding_connection(primary)
    if sec_kind == "single":
        return True
    return pri_kind == "wye" and sec_kind == "wye"


def reflect_triplens(
    secondary: SystemSpec,
    primary: SystemSpec,
    line_i3: Mapping[str, float],
    neutral_i3: complex,
    primary_phases: tuple[str, ...],
) -> tuple[dict[str, float], complex]:
    """Third-harmonic line currents (A, RMS magnitudes) and neutral phasor on the primary side.

    Delta windings keep them (zero on the primary).  Wye–wye: divided by n.  Single-phase:
    the winding current's triplen is (I3_a + I3_b)/(2n) for split-phase (an upper bound: the two
    halves' triplens add in the winding) or I3_a/n for 2-wire, on both primary lines; fed
    line-to-neutral it also returns on the primary neutral.
    """
    if not triplens_pass(secondary, primary):
        return {}, 0j
    n = winding_ratio(secondary, primary, primary_phases)
    if winding_connection(secondary) == "single":
        if secondary.kind == SystemKind.SPLIT:
            i3 = (line_i3.get("A", 0.0) + line_i3.get("B", 0.0)) / (2.0 * n)
        else:
            i3 = line_i3.get("A", 0.0) / n
        if len(primary_phases) >= 2:
            return {primary_phases[0]: i3, primary_phases[1]: i3}, 0j
        p = primary_phases[0]
        return {p: i3}, i3 * triplen_rotation(primary, p)
    return {p: v / n for p, v in line_i3.items()}, neutral_i3 / n


def va_from_kva(load_kva: float) -> float:
    """Volt-amperes from kilovolt-amperes (a schedule's kVA, or kW read as kVA at unity power factor)."""
    return load_kva * 1000.0


def va_from_amps(current_a: float, poles: int, spec: SystemSpec) -> float:
    """Apparent power of a load given its current, at the nominal voltages of the system string.

    Formula (common practice; nominal voltages per ANSI C84.1): 1-pole VA = I × V_LN,
    2-pole VA = I × V_LL, 3-pole VA = √3 × V_LL × I.  Raises :class:`CalcError` for a 1-pole
    load on a system without a neutral.
    """
    v_ll = spec.nominal_v_ll()
    if poles <= 1:
        if spec.v_ln is None:
            raise CalcError(f"a 1-pole load current cannot be converted on {spec.name}: it has no neutral")
        return current_a * spec.v_ln
    if poles == 2:
        return current_a * v_ll
    return current_a * SQRT3 * v_ll
