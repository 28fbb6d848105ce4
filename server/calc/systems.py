"""Electrical systems: the accepted system strings, their voltages and phasors, and the slot→phase map.

System strings follow the ANSI C84.1 nominal-voltage notation plus phases and wires
(``208Y/120 3PH 4W``).  Phasor arithmetic uses the nominal line-to-neutral voltage and
V_LL = √3 × V_LN for wye and split-phase systems (so 207.8 V, not the nameplate 208 V);
reports show the nominal string.

Phasor convention (common practice): A at 0°, B at −120°, C at +120° (ABC rotation);
split-phase A at 0°, B at 180°.  High-leg (centre-tapped) delta ``240/120 3PH 4W``: the
tapped winding is A–C, so V_AN = 120∠0°, V_CN = 120∠180°, V_BN = 207.8∠−90°; every
line-to-line voltage is 240 V.  Delta 3-wire systems have no neutral; their phasors are
referred to a virtual star point for arithmetic only.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass
from enum import StrEnum

from .errors import UnknownSystemError

SQRT3 = math.sqrt(3.0)


class SystemKind(StrEnum):
    """How the windings of a system are arranged."""

    SINGLE = "single"  # 1PH 2W: one line and a neutral
    SPLIT = "split"  # 1PH 3W: centre-tapped single-phase (120/240)
    WYE = "wye"  # 3PH 4W grounded wye
    DELTA = "delta"  # 3PH 3W delta (no neutral)
    HIGH_LEG = "high_leg"  # 3PH 4W delta with a centre-tapped winding (B is the high leg)


@dataclass(frozen=True)
class SystemSpec:
    """One accepted system string and what follows from it."""

    name: str
    kind: SystemKind
    v_ln: float | None  # nominal line-to-neutral volts (None without a neutral)
    v_ll: float  # line-to-line volts used in the arithmetic
    phases: tuple[str, ...]  # phase keys reported ("A", "B", "C")
    wires: int

    @property
    def has_neutral(self) -> bool:
        return self.kind in (SystemKind.SINGLE, SystemKind.SPLIT, SystemKind.WYE, SystemKind.HIGH_LEG)

    @property
    def three_phase(self) -> bool:
        return len(self.phases) == 3

    @property
    def medium_voltage(self) -> bool:
        return self.v_ll > 1000.0

    @property
    def high_leg(self) -> str | None:
        return "B" if self.kind == SystemKind.HIGH_LEG else None

    def phase_voltage(self, phase: str) -> complex:
        """Phasor voltage of ``phase`` to neutral (or to the virtual star point of a delta)."""
        return _phasors(self)[phase]

    def line_voltage(self, p: str, q: str) -> complex:
        """Phasor voltage from line ``p`` to line ``q``."""
        v = _phasors(self)
        return v[p] - v[q]

    def nominal_v_ll(self) -> float:
        """Line-to-line voltage as printed in the system string (208, 480, 240...)."""
        return _NOMINAL_LL[self.name]


def _wye(v_ln: float) -> dict[str, complex]:
    return {
        "A": cmath.rect(v_ln, 0.0),
        "B": cmath.rect(v_ln, math.radians(-120.0)),
        "C": cmath.rect(v_ln, math.radians(120.0)),
    }


_PHASOR_CACHE: dict[str, dict[str, complex]] = {}


def _phasors(spec: SystemSpec) -> dict[str, complex]:
    cached = _PHASOR_CACHE.get(spec.name)
    if cached is not None:
        return cached
    if spec.kind == SystemKind.SINGLE:
        result = {"A": complex(spec.v_ln or 0.0, 0.0)}
    elif spec.kind == SystemKind.SPLIT:
        v = spec.v_ln or 0.0
        result = {"A": complex(v, 0.0), "B": complex(-v, 0.0)}
    elif spec.kind == SystemKind.WYE:
        result = _wye(spec.v_ln or 0.0)
    elif spec.kind == SystemKind.DELTA:
        result = _wye(spec.v_ll / SQRT3)
    else:  # high-leg delta: tapped winding A–C, B opposite the tap
        half = spec.v_ll / 2.0
        result = {
            "A": complex(half, 0.0),
            "B": complex(0.0, -spec.v_ll * SQRT3 / 2.0),
            "C": complex(-half, 0.0),
        }
    _PHASOR_CACHE[spec.name] = result
    return result


def _spec(name: str, kind: SystemKind, v_ln: float | None, v_ll: float | None = None) -> SystemSpec:
    if kind == SystemKind.SINGLE:
        return SystemSpec(name, kind, v_ln, v_ln or 0.0, ("A",), 2)
    if kind == SystemKind.SPLIT:
        return SystemSpec(name, kind, v_ln, 2.0 * (v_ln or 0.0), ("A", "B"), 3)
    if kind == SystemKind.WYE:
        return SystemSpec(name, kind, v_ln, SQRT3 * (v_ln or 0.0), ("A", "B", "C"), 4)
    if kind == SystemKind.DELTA:
        return SystemSpec(name, kind, None, float(v_ll or 0.0), ("A", "B", "C"), 3)
    return SystemSpec(name, kind, v_ln, float(v_ll or 0.0), ("A", "B", "C"), 4)


#: Every accepted system string.  Source of the nominal voltages: ANSI C84.1 (nominal system
#: voltages); the letters after the numbers are this format's own.
SYSTEMS: dict[str, SystemSpec] = {
    s.name: s
    for s in (
        _spec("120 1PH 2W", SystemKind.SINGLE, 120.0),
        _spec("277 1PH 2W", SystemKind.SINGLE, 277.0),
        _spec("120/240 1PH 3W", SystemKind.SPLIT, 120.0),
        _spec("208Y/120 3PH 4W", SystemKind.WYE, 120.0),
        _spec("480Y/277 3PH 4W", SystemKind.WYE, 277.0),
        _spec("600Y/347 3PH 4W", SystemKind.WYE, 347.0),
        _spec("240 3PH 3W", SystemKind.DELTA, None, 240.0),
        _spec("480 3PH 3W", SystemKind.DELTA, None, 480.0),
        _spec("600 3PH 3W", SystemKind.DELTA, None, 600.0),
        _spec("240/120 3PH 4W", SystemKind.HIGH_LEG, 120.0, 240.0),
        _spec("4160 3PH 3W", SystemKind.DELTA, None, 4160.0),
        _spec("12470Y/7200 3PH 4W", SystemKind.WYE, 7200.0),
        _spec("13200 3PH 3W", SystemKind.DELTA, None, 13200.0),
        _spec("13800 3PH 3W", SystemKind.DELTA, None, 13800.0),
        _spec("24940Y/14400 3PH 4W", SystemKind.WYE, 14400.0),
        _spec("34500 3PH 3W", SystemKind.DELTA, None, 34500.0),
    )
}

_NOMINAL_LL: dict[str, float] = {
    "120 1PH 2W": 120.0,
    "277 1PH 2W": 277.0,
    "120/240 1PH 3W": 240.0,
    "208Y/120 3PH 4W": 208.0,
    "480Y/277 3PH 4W": 480.0,
    "600Y/347 3PH 4W": 600.0,
    "240 3PH 3W": 240.0,
    "480 3PH 3W": 480.0,
    "600 3PH 3W": 600.0,
    "240/120 3PH 4W": 240.0,
    "4160 3PH 3W": 4160.0,
    "12470Y/7200 3PH 4W": 12470.0,
    "13200 3PH 3W": 13200.0,
    "13800 3PH 3W": 13800.0,
    "24940Y/14400 3PH 4W": 24940.0,
    "34500 3PH 3W": 34500.0,
}


def accepted_systems() -> list[str]:
    return list(SYSTEMS)


def get_system(name: str) -> SystemSpec:
    """Look up a system string; anything else is refused with the list of accepted forms."""
    spec = SYSTEMS.get(name)
    if spec is None:
        raise UnknownSystemError(f"unknown system {name!r}; accepted forms: " + ", ".join(repr(s) for s in SYSTEMS))
    return spec


def slot_row(slot: int) -> int:
    """Row of a slot: odd slots on the left, even on the right; row = (slot + 1) // 2."""
    return (slot + 1) // 2


def slot_side(slot: int) -> str:
    return "left" if slot % 2 == 1 else "right"


def slot_phase(spec: SystemSpec, slot: int) -> str:
    """Bus phase of a slot: three-phase A/B/C by row, split-phase A/B by row, 2-wire A."""
    n = len(spec.phases)
    return spec.phases[(slot_row(slot) - 1) % n]


def breaker_slots(slot: int, poles: int) -> tuple[int, ...]:
    """Slots a breaker of ``poles`` poles at ``slot`` takes: s, s+2, s+4 (same side, successive rows)."""
    return tuple(slot + 2 * i for i in range(max(poles, 1)))


def breaker_phases(spec: SystemSpec, slot: int, poles: int) -> tuple[str, ...]:
    """Phases of each pole of a breaker at ``slot``."""
    return tuple(slot_phase(spec, s) for s in breaker_slots(slot, poles))
