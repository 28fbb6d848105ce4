"""The screens' number filters (server.web.templating) print with the shared server.formatting functions."""

from __future__ import annotations

import math

from server import formatting
from server.web.templating import fmt_kva, fmt_num, fmt_pct, make_templates


def test_screen_filters_match_the_shared_functions() -> None:
    for va in (0.0, 999.4, 12_345.6, 1_234_567.0, None, math.nan, math.inf):
        assert fmt_kva(va) == formatting.va_as_kva(va, 1)
        assert fmt_kva(va, 2) == formatting.va_as_kva(va, 2)
    assert fmt_kva(12_345.6) == "12.3"
    assert fmt_num(1_234.4) == "1,234" and fmt_num(2.345, 2) == "2.35"
    assert fmt_pct(5.04) == "5 %" and fmt_pct(5.04, 1) == "5.0 %" == formatting.pct(5.04, 1)
    # Not computed, or not a finite number: a dash, never "nan" on a schedule.
    assert fmt_num(None) == fmt_pct(math.nan) == fmt_kva(math.inf) == formatting.DASH


def test_filters_are_registered_under_the_screens_names() -> None:
    env = make_templates().env
    out = env.from_string("{{ 12345.6|kva }} · {{ 1234.4|num }} · {{ 5.04|pct(1) }} · {{ none|num }}").render()
    assert out == "12.3 · 1,234 · 5.0 % · —"
