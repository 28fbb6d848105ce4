"""server.formatting: the number formats shared by screens and PDFs."""

from __future__ import annotations

import math

import pytest

from server import formatting as fmt


@pytest.mark.parametrize(
    ("func", "value", "text"),
    [
        (fmt.va, 12345.4, "12,345"),
        (fmt.va, 12345.5, "12,346"),  # round half to even would give 12,346 too; whole VA is enough
        (fmt.va, 0.0, "0"),
        (fmt.kva, 112.5, "112.5"),
        (fmt.va_as_kva, 295_700.0, "295.7"),
        (fmt.amps, 154.917, "154.9"),
        (fmt.amps, 1234.56, "1,234.6"),
        (fmt.pct, 28.94, "28.9 %"),
        (fmt.ka, 35.0, "35.0 kA"),
        (fmt.factor, 0.5, "50 %"),
        (fmt.factor, 0.7, "70 %"),
        (fmt.rating, 225, "225 A"),
        (fmt.rating, 2000, "2,000 A"),
        (fmt.rating, 112.5, "112.5 A"),
        (fmt.feet, 120.0, "120 ft"),
        (fmt.text, "  ", fmt.DASH),
        (fmt.text, "recessed", "recessed"),
    ],
)
def test_formats(func, value, text):
    assert func(value) == text


@pytest.mark.parametrize("func", [fmt.va, fmt.kva, fmt.amps, fmt.pct, fmt.ka, fmt.factor, fmt.ratio, fmt.rating])
@pytest.mark.parametrize("value", [None, math.nan, math.inf])
def test_unknown_values_print_a_dash(func, value):
    assert func(value) == fmt.DASH


def test_pct_digits():
    assert fmt.pct(0.16154, 2) == "0.16 %"


def test_register_filters_adds_every_filter():
    class Env:
        filters: dict = {}

    env = Env()
    fmt.register_filters(env)
    assert set(env.filters) == set(fmt.FILTERS)


def test_landing_in_the_installers_words() -> None:
    # The balancer's wording (server.calc.balance.rotation_landing), shared by the PDF, export and report.
    assert fmt.landing(1) == "A→B, B→C, C→A"
    assert fmt.landing(2) == "A→C, B→A, C→B"
    assert fmt.landing(0) == fmt.landing(None) == ""
