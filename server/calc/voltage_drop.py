"""Feeder impedance and voltage drop from NFPA 70 Chapter 9 Table 9.

Table 9 gives AC resistance R and reactance X_L in ohms to neutral per 1000 ft (75 °C,
60 Hz, three single conductors in conduit).  Voltage drop uses the effective impedance of
Table 9 Note 2:

    Ze = R cos θ + X sin θ        (ohms per 1000 ft, θ = power-factor angle, lagging)

    three-phase:               VD_LL = √3 × I × Ze × L / 1000 / sets
    single-phase 2-wire and
    120/240 split-phase:       VD    = 2 × I × Ze × L / 1000 / sets   (out and back)

and the percentage is VD over the nominal line-to-line voltage of the system (for a 2-wire
system its only voltage; for 120/240 V split-phase the 240 V line-to-line drop of a
balanced load, whose neutral then carries no current).
"""

from __future__ import annotations

import math
from functools import lru_cache

from . import tables
from .model import Conduit, Material
from .systems import SQRT3, SystemSpec


@lru_cache(maxsize=512)  # sizes × materials × conduits: a few hundred at most; errors are never cached
def _row(size: str, material: Material | str, conduit: Conduit | str) -> tuple[float, float]:
    """(R, X_L) of Table 9, ohms to neutral per 1000 ft."""
    row = tables.table9().get(size)
    if row is None:
        raise ValueError(f"conductor size {size!r} is not in NFPA 70 Chapter 9 Table 9")
    r = row.resistance(Material(material), Conduit(conduit))
    if r is None:
        raise ValueError(f"NFPA 70 Chapter 9 Table 9 has no {Material(material).value} row for size {size!r}")
    return r, row.reactance(Conduit(conduit))


def feeder_impedance_ohm(
    size: str, material: Material | str, conduit: Conduit | str, length_ft: float, sets: int
) -> complex:
    """Impedance of one phase conductor run, ohms: (R + jX_L) × length_ft / 1000 / sets (Table 9)."""
    if sets < 1:
        raise ValueError(f"sets must be at least 1, got {sets!r}")
    if length_ft < 0:
        raise ValueError(f"length_ft must not be negative, got {length_ft!r}")
    r, x = _row(size, material, conduit)
    return complex(r, x) * length_ft / 1000.0 / sets


def effective_z_ohm_per_kft(size: str, material: Material | str, conduit: Conduit | str, pf: float) -> float:
    """Table 9 Note 2 effective impedance, ohms per 1000 ft: Ze = R cos θ + X sin θ (lagging)."""
    if not 0.0 <= pf <= 1.0:
        raise ValueError(f"power factor must be between 0 and 1, got {pf!r}")
    r, x = _row(size, material, conduit)
    return r * pf + x * math.sqrt(max(0.0, 1.0 - pf * pf))


def voltage_drop_v(
    *,
    current_a: float,
    length_ft: float,
    size: str,
    material: Material | str,
    conduit: Conduit | str,
    sets: int,
    pf: float,
    system: SystemSpec,
) -> float:
    """Voltage drop in volts (line-to-line for three-phase; loop for single/split-phase)."""
    if sets < 1:
        raise ValueError(f"sets must be at least 1, got {sets!r}")
    ze = effective_z_ohm_per_kft(size, material, conduit, pf)
    multiplier = SQRT3 if system.three_phase else 2.0
    return multiplier * abs(current_a) * ze * length_ft / 1000.0 / sets


def voltage_drop_pct(
    *,
    current_a: float,
    length_ft: float,
    size: str,
    material: Material | str,
    conduit: Conduit | str,
    sets: int,
    pf: float,
    system: SystemSpec,
) -> float:
    """Voltage drop as a percentage of the system's nominal line-to-line voltage."""
    vd = voltage_drop_v(
        current_a=current_a,
        length_ft=length_ft,
        size=size,
        material=material,
        conduit=conduit,
        sets=sets,
        pf=pf,
        system=system,
    )
    return 100.0 * vd / system.nominal_v_ll()
