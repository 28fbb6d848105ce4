"""Published tables as data, each file citing its source and edition.

(The loaders here are filled in by the tables work; ``conductor_sizes`` is used by the
project-file parser to check typed sizes.)
"""

from __future__ import annotations

CONDUCTOR_SIZES: tuple[str, ...] = (
    "14", "12", "10", "8", "6", "4", "3", "2", "1", "1/0", "2/0", "3/0", "4/0",
    "250", "300", "350", "400", "500", "600", "700", "750", "800", "900", "1000",
)


def conductor_sizes() -> tuple[str, ...]:
    """Conductor sizes in ascending order (AWG then kcmil), as in NFPA 70 Table 310.16."""
    return CONDUCTOR_SIZES
