"""Transformer ratings: full-load current, standard kVA sizes, NEC Table 450.3(B) protection, K-factor.

* FLA (common practice): three-phase I = kVA × 1000 / (√3 × V_LL); single-phase I = kVA × 1000 / V.
* Standard kVA ratings: IEEE Std C57.12.00 preferred ratings / NEMA ST 20
  (``tables/transformer_kva.json``, from memory).
* Overcurrent protection: NFPA 70 Table 450.3(B) (``tables/transformer_450_3b.json``).
* K-factor: K = Σ (I_h/I_1)² h² / Σ (I_h/I_1)² (IEEE Std C57.110 / UL 1561 definition).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from . import tables
from .errors import SizingError
from .systems import SQRT3

_EPS = 1e-9  # tolerance on "at least" comparisons of floating-point products


def full_load_amps(kva: float, v_ll: float, three_phase: bool) -> float:
    """Rated current, A: kVA·1000/(√3·V_LL) three-phase, kVA·1000/V single-phase (common practice)."""
    if v_ll <= 0:
        raise ValueError(f"voltage must be positive, got {v_ll!r}")
    va = kva * 1000.0
    return va / (SQRT3 * v_ll) if three_phase else va / v_ll


def standard_kva_sizes(three_phase: bool) -> tuple[float, ...]:
    """Standard kVA ratings (IEEE C57.12.00 / NEMA ST 20 preferred ratings, from memory), ascending."""
    return tables.transformer_kva_ratings(bool(three_phase))


def suggest_kva(load_kva: float, growth_margin_pct: float, three_phase: bool) -> float:
    """Smallest standard rating ≥ load_kva × (1 + growth_margin_pct/100).

    Raises SizingError when the requirement exceeds the largest standard rating.
    """
    need = max(load_kva, 0.0) * (1.0 + growth_margin_pct / 100.0)
    sizes = standard_kva_sizes(three_phase)
    for size in sizes:
        if size >= need - _EPS:
            return size
    kind = "three-phase" if three_phase else "single-phase"
    raise SizingError(
        f"load {load_kva:,.1f} kVA with {growth_margin_pct:g} % growth margin needs {need:,.1f} kVA, "
        f"more than the largest standard {kind} rating ({sizes[-1]:g} kVA)"
    )


@dataclass(frozen=True)
class TransformerProtection:
    """NEC Table 450.3(B) maximum device ratings (A), both options."""

    primary_only_amps: int  # primary protection only
    primary_with_secondary_amps: int  # primary device when secondary protection is also provided
    secondary_amps: int  # secondary device of that option


def _ratings() -> tuple[int, ...]:
    """240.6(A) ratings plus the small fuse-only ratings 1, 3, 6, 10 A (601 A is left out: a
    fuse-only step that breakers cannot match)."""
    return tuple(r for r in tables.standard_ratings_with_fuses() if r != 601)


def _at_most(amps: float) -> int:
    """Largest standard rating not above ``amps``; 0 if none."""
    best = 0
    for rating in _ratings():
        if rating <= amps + _EPS:
            best = rating
    return best


def _at_least(amps: float) -> int:
    for rating in _ratings():
        if rating >= amps - _EPS:
            return rating
    raise SizingError(f"{amps:,.1f} A is above the largest standard rating of NEC 240.6(A)")


def _limit(fla: float, rows: list[dict]) -> int:
    for row in rows:  # rows ordered by descending minimum current
        if fla >= row["min_a"]:
            amps = fla * row["pct"] / 100.0
            return _at_least(amps) if row["next_size_up"] else _at_most(amps)
    raise ValueError(f"rated current must not be negative, got {fla!r}")


def protection_450_3b(fla_primary: float, fla_secondary: float) -> TransformerProtection:
    """Maximum overcurrent device ratings of NEC Table 450.3(B) (transformers ≤ 1000 V; ≤ 600 V in 2017).

    Primary only: 125 % of primary FLA (next standard size up permitted, Note 1) for 9 A or
    more, 167 % below 9 A, 300 % below 2 A.  Primary and secondary: primary at most 250 %;
    secondary 125 % (next size up) for 9 A or more, 167 % below 9 A.  Below 9 A the
    percentages are maxima, so the rating is the largest standard one not above them
    (fuse-only ratings 1, 3, 6, 10 A included); 0 means no standard rating fits.
    """
    data = tables.transformer_protection_table()
    both = data["primary_with_secondary"]
    return TransformerProtection(
        primary_only_amps=_limit(fla_primary, data["primary_only"]),
        primary_with_secondary_amps=_at_most(fla_primary * both["primary"]["pct"] / 100.0),
        secondary_amps=_limit(fla_secondary, both["secondary"]),
    )


def k_factor_spectrum(harmonics: Mapping[int, float]) -> float:
    """K = Σ (I_h/I_1)² h² / Σ (I_h/I_1)² over the given harmonic orders (fundamental = 1.0 if absent)."""
    spectrum = {1: 1.0, **{int(h): float(v) for h, v in harmonics.items()}}
    num = sum((v * v) * h * h for h, v in spectrum.items())
    den = sum(v * v for v in spectrum.values())
    return num / den if den else 1.0


def k_factor(harmonic3_fraction: float) -> float:
    """K-factor of a current with a fundamental and a 3rd harmonic of ``harmonic3_fraction`` × I_1.

    K = (1 + 9 f²) / (1 + f²).
    """
    if harmonic3_fraction < 0 or math.isnan(harmonic3_fraction):
        raise ValueError(f"harmonic fraction must not be negative, got {harmonic3_fraction!r}")
    return k_factor_spectrum({3: harmonic3_fraction})


def suggest_k_rating(k: float) -> int | None:
    """Smallest standard K-rating (K-4, K-9, K-13, K-20, ...) ≥ k; None when k ≤ 1.5."""
    if k <= tables.k_factor_threshold():
        return None
    for rating in tables.k_factor_ratings():
        if rating >= k - _EPS:
            return rating
    raise SizingError(f"K-factor {k:.1f} is above the largest standard K-rating (K-{tables.k_factor_ratings()[-1]})")
