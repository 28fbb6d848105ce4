"""Bolted fault current by the ohmic method (IEEE Std 141 "Red Book" Chapter 4, IEEE Std 242 style).

Every element becomes a complex impedance in ohms at one voltage level, impedances in
series add, and impedances on the other side of a transformer are referred by the square
of the voltage ratio:

* utility/source:   |Z| = V_LL / (√3 × I_sc), split by X/R (None = pure reactance);
  an infinite bus (no fault current given) is Z = 0;
* transformer:      |Z| = %Z/100 × V_LL² / S, split by X/R, in ohms at the secondary;
* conductors:       (R + jX_L) × length / 1000 / sets from NFPA 70 Chapter 9 Table 9
  (:func:`server.calc.voltage_drop.feeder_impedance_ohm`);
* referral:         Z_to = Z_from × (V_to / V_from)².

Three-phase systems: Z is the per-phase (star-equivalent) impedance and the bolted
three-phase fault is I = V_LL / (√3 × |Z|).

Single-phase systems (``1PH 2W`` and ``120/240 1PH 3W``): Z is the impedance of the whole
fault loop and the fault is I = V / |Z| with V the full winding voltage (line-to-line for
120/240 V: a fault across the 240 V winding).  The loop holds the transformer impedance
(:func:`transformer_impedance` with ``three_phase=False``, which is already a loop
impedance), twice each conductor's one-way impedance (out and back), and twice the
per-phase impedance of the three-phase system upstream (the primary is connected line to
line), referred to the secondary: see :func:`single_phase_loop_impedance`.  With an infinite
source and no conductors this gives exactly FLA × 100 / %Z.

Use the system's nominal voltage (``SystemSpec.nominal_v_ll()``) throughout, as the
bolted-fault convention does; :func:`bolted_fault_ka` does.
"""

from __future__ import annotations

import math

from .systems import SQRT3, SystemSpec


def _split(magnitude: float, x_over_r: float | None) -> complex:
    """A complex impedance of ``magnitude`` with the given X/R (None = purely reactive)."""
    if x_over_r is None or math.isinf(x_over_r):
        return complex(0.0, magnitude)
    if x_over_r < 0:
        raise ValueError(f"X/R must not be negative, got {x_over_r!r}")
    r = magnitude / math.sqrt(1.0 + x_over_r * x_over_r)
    return complex(r, r * x_over_r)


def source_impedance(v_ll: float, fault_ka: float | None, x_over_r: float | None) -> complex:
    """Source impedance per phase, ohms: V_LL / (√3 × I_sc) split by X/R; 0 for an infinite bus."""
    if fault_ka is None or math.isinf(fault_ka):
        return 0j
    if fault_ka <= 0:
        raise ValueError(f"available fault current must be positive, got {fault_ka!r} kA")
    return _split(v_ll / (SQRT3 * fault_ka * 1000.0), x_over_r)


def transformer_impedance(
    kva: float, impedance_pct: float, x_over_r: float | None, v_ll_secondary: float, three_phase: bool
) -> complex:
    """Transformer impedance at the secondary, ohms: %Z/100 × V² / (kVA × 1000), split by X/R.

    Three-phase: per-phase impedance with V = secondary line-to-line voltage.  Single-phase:
    the winding's loop impedance with V = the full secondary winding voltage (240 V for
    120/240 V), so that V/|Z| = FLA × 100/%Z.
    """
    if kva <= 0:
        raise ValueError(f"transformer kVA must be positive, got {kva!r}")
    if impedance_pct <= 0:
        raise ValueError(f"transformer impedance must be positive, got {impedance_pct!r} %")
    del three_phase  # the same formula serves both; see the docstring for what V means
    return _split(impedance_pct / 100.0 * v_ll_secondary**2 / (kva * 1000.0), x_over_r)


def refer_impedance(z: complex, v_from_ll: float, v_to_ll: float) -> complex:
    """Refer an impedance across a transformer: Z × (V_to / V_from)²."""
    if v_from_ll <= 0 or v_to_ll <= 0:
        raise ValueError("voltages must be positive to refer an impedance")
    return z * (v_to_ll / v_from_ll) ** 2


def single_phase_loop_impedance(
    z_transformer: complex, z_upstream_per_phase: complex = 0j, z_conductors_one_way: complex = 0j
) -> complex:
    """Fault-loop impedance of a single-phase secondary (see the module docstring).

    z_transformer from :func:`transformer_impedance` (``three_phase=False``); the upstream
    per-phase impedance already referred to the secondary; the secondary conductors' one-way
    impedance.  Loop = Z_T + 2 × Z_upstream + 2 × Z_conductors.
    """
    return z_transformer + 2.0 * z_upstream_per_phase + 2.0 * z_conductors_one_way


def bolted_fault_ka(z_total: complex, system: SystemSpec) -> float:
    """Bolted fault current, kA.

    Three-phase: V_LL / (√3 × |Z|) with Z per phase.  Single-phase and split-phase:
    V_LL / |Z| with Z the fault-loop impedance (module docstring).  V is the nominal
    system voltage.  A zero impedance (infinite bus, no transformer, no conductor) gives
    ``math.inf``.
    """
    magnitude = abs(z_total)
    v = system.nominal_v_ll()
    if magnitude == 0.0:
        return math.inf
    if system.three_phase:
        return v / (SQRT3 * magnitude) / 1000.0
    return v / magnitude / 1000.0


def x_over_r(z: complex) -> float | None:
    """X/R ratio of an impedance; None when R is zero (purely reactive or zero)."""
    if z.real <= 0.0:
        return None
    return z.imag / z.real
