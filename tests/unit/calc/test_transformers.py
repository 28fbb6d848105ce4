"""Transformer FLA, standard kVA ratings, NEC Table 450.3(B) protection and K-factor."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from server.calc.errors import SizingError
from server.calc.transformers import (
    TransformerProtection,
    full_load_amps,
    k_factor,
    k_factor_spectrum,
    protection_450_3b,
    standard_kva_sizes,
    suggest_k_rating,
    suggest_kva,
)
from tests.helpers import assert_close


@pytest.mark.parametrize(
    ("kva", "volts", "three_phase", "amps"),
    [
        (75.0, 208.0, True, 208.2),  # 75,000 / (√3 × 208) = 208.18 A
        (75.0, 480.0, True, 90.21),  # 75,000 / (√3 × 480) = 90.21 A
        (1000.0, 480.0, True, 1202.8),
        (50.0, 240.0, False, 208.33),  # 50,000 / 240
        (25.0, 480.0, False, 52.08),
    ],
    ids=["75kVA-208V", "75kVA-480V", "1000kVA-480V", "50kVA-240V-1ph", "25kVA-480V-1ph"],
)
def test_full_load_amps(kva: float, volts: float, three_phase: bool, amps: float) -> None:
    # Common practice: I = kVA·1000/(√3·V) three-phase, kVA·1000/V single-phase.
    assert_close(full_load_amps(kva, volts, three_phase), amps, rel=2e-4)


def test_suggest_kva_with_margin() -> None:
    # 70 kVA × 1.25 = 87.5 kVA → 112.5 kVA (IEEE C57.12.00 / NEMA ST 20 preferred ratings, from memory).
    assert suggest_kva(70.0, 25.0, True) == 112.5
    assert suggest_kva(75.0, 0.0, True) == 75.0  # exactly a rating
    assert suggest_kva(40.0, 25.0, False) == 50.0  # 50 kVA single-phase
    assert suggest_kva(0.0, 25.0, True) == 15.0


def test_suggest_kva_just_above_a_rating() -> None:
    # 140 × 1.2 = 168 kVA exceeds 167 kVA → 250 kVA single-phase.
    assert suggest_kva(140.0, 20.01, False) == 250.0


def test_suggest_kva_too_large_is_named() -> None:
    with pytest.raises(SizingError, match="largest standard three-phase rating"):
        suggest_kva(4500.0, 25.0, True)


def test_standard_sizes_ascending() -> None:
    for three in (True, False):
        sizes = standard_kva_sizes(three)
        assert list(sizes) == sorted(sizes)


def test_450_3b_75kva_480_to_208() -> None:
    # NFPA 70-2023 Table 450.3(B), from memory; ratings from 240.6(A).
    # Primary FLA 90.21 A: primary only 125 % = 112.8 A → next standard size up 125 A (Note 1).
    # Primary and secondary: primary ≤ 250 % = 225.5 A → 225 A; secondary FLA 208.2 A × 125 % = 260.2 A → 300 A.
    prot = protection_450_3b(full_load_amps(75, 480, True), full_load_amps(75, 208, True))
    assert prot == TransformerProtection(primary_only_amps=125, primary_with_secondary_amps=225, secondary_amps=300)


def test_450_3b_exact_standard_rating_not_bumped() -> None:
    # 125 % of 80 A = 100 A, itself a standard rating (NFPA 70-2023 Table 450.3(B) Note 1, from memory).
    assert protection_450_3b(80.0, 80.0).primary_only_amps == 100
    assert protection_450_3b(80.0, 80.0).secondary_amps == 100


@pytest.mark.parametrize(
    ("fla", "primary_only"),
    [(5.0, 6), (8.9, 10), (1.5, 3), (0.5, 1), (9.0, 15)],
    ids=["5A-167%=8.35->6A", "8.9A-167%=14.9->10A", "1.5A-300%=4.5->3A", "0.5A-300%=1.5->1A", "9A-125%=11.25->15A"],
)
def test_450_3b_small_currents(fla: float, primary_only: int) -> None:
    # NFPA 70-2023 Table 450.3(B), from memory: < 9 A 167 %, < 2 A 300 % (maxima: round down, fuse ratings
    # 1, 3, 6, 10 A of 240.6(A) allowed); ≥ 9 A 125 % with next size up.
    assert protection_450_3b(fla, 50.0).primary_only_amps == primary_only


def test_450_3b_small_secondary() -> None:
    # Secondary < 9 A: 167 % maximum. 8 A × 1.67 = 13.36 A → 10 A.
    assert protection_450_3b(50.0, 8.0).secondary_amps == 10


@pytest.mark.parametrize(
    ("fraction", "k"),
    [(0.0, 1.0), (0.5, 2.6), (1.0, 5.0)],
    ids=["no-3rd:K=1", "50%-3rd:(1+9·0.25)/1.25=2.6", "100%-3rd:(1+9)/2=5"],
)
def test_k_factor_third_harmonic(fraction: float, k: float) -> None:
    # IEEE C57.110 / UL 1561 definition (from memory): K = Σ(I_h/I_1)² h² / Σ(I_h/I_1)².
    assert_close(k_factor(fraction), k)


def test_k_factor_spectrum_by_hand() -> None:
    # 1: 1.0, 3: 0.5, 5: 0.3 → num = 1 + 0.25·9 + 0.09·25 = 5.5; den = 1.34 → K = 4.104 → K-9.
    k = k_factor_spectrum({3: 0.5, 5: 0.3})
    assert_close(k, 5.5 / 1.34)
    assert suggest_k_rating(k) == 9


@pytest.mark.parametrize(
    ("k", "rating"), [(1.0, None), (1.5, None), (1.6, 4), (4.0, 4), (5.0, 9), (9.5, 13), (13.5, 20), (20.0, 20)]
)
def test_suggest_k_rating(k: float, rating: int | None) -> None:
    # UL 1561 ratings K-4, K-9, K-13, K-20 (from memory); none suggested at K ≤ 1.5 (program threshold).
    assert suggest_k_rating(k) == rating


def test_k_factor_rejects_negative() -> None:
    with pytest.raises(ValueError, match="harmonic"):
        k_factor(-0.1)


@given(st.floats(min_value=0.0, max_value=1e5))
def test_k_factor_of_third_only_is_between_1_and_9(f: float) -> None:
    assert 1.0 - 1e-12 <= k_factor(f) <= 9.0 + 1e-9


@given(a=st.floats(min_value=1.0, max_value=3000.0), b=st.floats(min_value=1.0, max_value=3000.0))
def test_protection_monotone(a: float, b: float) -> None:
    lo, hi = sorted((a, b))
    p_lo, p_hi = protection_450_3b(lo, lo), protection_450_3b(hi, hi)
    assert p_lo.primary_only_amps <= p_hi.primary_only_amps
    assert p_lo.secondary_amps <= p_hi.secondary_amps
    assert p_lo.primary_with_secondary_amps <= p_hi.primary_with_secondary_amps
