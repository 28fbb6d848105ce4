"""Server-rendered charts as SVG text (matplotlib, Agg/SVG backend, no pyplot).

The same SVG goes into the browser page (inline), the ``chart.svg`` URL and the PDF set.  Text
is drawn as paths (``svg.fonttype = "path"``, matplotlib's bundled DejaVu Sans), so the chart
looks the same wherever it is shown and needs no font on the reader's machine.  Every chart has
axis labels with units and prints in black and white (line styles and hatching, not only
colour).  Figures are built with the object API (``Figure`` + ``FigureCanvasSVG``) so requests
served on several threads never share pyplot's global state.

Numbers come from :mod:`server.growth` and :mod:`server.calc.metered`; this module only draws.
"""

from __future__ import annotations

import io
import re
from collections.abc import Sequence
from dataclasses import dataclass

import matplotlib

matplotlib.use("Agg")

from matplotlib.backends.backend_svg import FigureCanvasSVG  # noqa: E402
from matplotlib.dates import AutoDateLocator, ConciseDateFormatter  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

_RC = {
    "svg.fonttype": "path",  # glyphs as paths: no font needed to view or print
    "svg.hashsalt": "panelwright",  # stable ids: the same chart gives the same bytes
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
}
matplotlib.rcParams.update(_RC)

INK = "#1f2933"
DEMAND = "#1f5fa8"
CONNECTED = "#6b7280"
FUTURE = "#e0a526"
LIMIT = "#b42318"


@dataclass(frozen=True)
class GrowthChartData:
    """What one node's growth chart shows; ``None`` where the node did not exist in that snapshot."""

    tag: str
    labels: tuple[str, ...]  # one per snapshot: "Rev 1", ..., "Working copy"
    connected_kva: tuple[float | None, ...]
    demand_kva: tuple[float | None, ...]  # future loads excluded
    demand_future_kva: tuple[float | None, ...]  # future loads included
    pct: tuple[float | None, ...]  # % of rating, future excluded (None for a source)
    pct_future: tuple[float | None, ...]
    rating_label: str  # e.g. "75 kVA transformer", "225 A bus / 150 A main"


def _svg(fig: Figure, title: str) -> str:
    buf = io.StringIO()
    FigureCanvasSVG(fig)
    fig.savefig(buf, format="svg", metadata={"Date": None, "Title": title}, bbox_inches="tight")
    text = buf.getvalue()
    # Inline use: drop the XML prolog and DOCTYPE, keep everything from <svg on.
    text = text[text.index("<svg") :]
    # Scale with the page: keep the viewBox, let CSS decide the size.
    text = re.sub(r'<svg([^>]*?) width="[^"]+" height="[^"]+"', r'<svg\1 class="chart" role="img"', text, count=1)
    return text.replace("<svg", f'<svg aria-label="{_esc(title)}"', 1)


def _esc(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace('"', "&quot;")


def _pairs(xs: Sequence[int], ys: Sequence[float | None]) -> tuple[list[int], list[float]]:
    keep = [(x, y) for x, y in zip(xs, ys, strict=True) if y is not None]
    return [x for x, _ in keep], [y for _, y in keep]


def growth_chart_svg(data: GrowthChartData) -> str:
    """Connected and demand load (kVA) over the snapshots, future loads as a hatched band, and
    % of rating below (100 % marked)."""
    n = len(data.labels)
    xs = list(range(n))
    has_pct = any(p is not None for p in data.pct)
    fig = Figure(figsize=(7.2, 4.6 if has_pct else 3.0), dpi=100)
    if has_pct:
        ax, ax2 = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": (3, 2), "hspace": 0.12})
    else:
        ax, ax2 = fig.subplots(1, 1), None
    fig.suptitle(f"{data.tag}: load growth", fontsize=10.5, color=INK)

    # Future band: between demand without and with future loads, where both exist.
    band = [
        (x, lo, hi)
        for x, lo, hi in zip(xs, data.demand_kva, data.demand_future_kva, strict=True)
        if lo is not None and hi is not None
    ]
    if band:
        bx = [b[0] for b in band]
        ax.fill_between(
            bx,
            [b[1] for b in band],
            [b[2] for b in band],
            facecolor=FUTURE,
            alpha=0.35,
            hatch="///",
            edgecolor=FUTURE,
            linewidth=0.5,
            label="Future loads (band)",
        )
    cx, cy = _pairs(xs, data.connected_kva)
    ax.plot(cx, cy, color=CONNECTED, linestyle="--", marker="s", markersize=4, label="Connected load")
    dx, dy = _pairs(xs, data.demand_kva)
    ax.plot(dx, dy, color=DEMAND, linestyle="-", marker="o", markersize=4.5, label="Demand load")
    ax.set_ylabel("Load (kVA)")
    ax.set_ylim(bottom=0, top=max([1.0, *cy, *dy, *(b[2] for b in band)]) * 1.1)
    ax.grid(True, axis="y", color="#d0d5dd", linewidth=0.6)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
    bottom = ax
    if ax2 is not None:
        px, py = _pairs(xs, data.pct)
        fx, fy = _pairs(xs, data.pct_future)
        ax2.plot(fx, fy, color=FUTURE, linestyle=":", marker="^", markersize=4, label="With future loads")
        ax2.plot(px, py, color=DEMAND, linestyle="-", marker="o", markersize=4.5, label="Without future loads")
        ax2.axhline(100.0, color=LIMIT, linewidth=1.0, linestyle="-.", label="100 % of rating")
        top = max([100.0, *py, *fy])
        ax2.set_ylim(0, top * 1.12)
        ax2.set_ylabel("% of rating")
        ax2.grid(True, axis="y", color="#d0d5dd", linewidth=0.6)
        ax2.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
        ax2.set_title(f"Rating: {data.rating_label}", fontsize=8.5, loc="right", color=INK)
        bottom = ax2
    bottom.set_xticks(xs, list(data.labels))
    bottom.set_xlabel("Issued revision (and the working copy)")
    ax.set_xlim(-0.4, max(n - 1, 0) + 0.4)
    return _svg(fig, f"Load growth of {data.tag}")


@dataclass(frozen=True)
class ProfileChartData:
    """A metered-demand profile: daily peaks, the overall peak and the 220.87 existing load."""

    title: str
    days: tuple[str, ...]  # ISO dates
    daily_peak_kva: tuple[float, ...]
    peak_kva: float
    peak_day: str  # ISO date of the peak
    existing_load_kva: float | None  # maximum demand × 125 %


def profile_chart_svg(data: ProfileChartData) -> str:
    """Daily peak demand (kVA) over the recording, the peak marked, the existing load as a line."""
    from datetime import date

    fig = Figure(figsize=(7.2, 3.2), dpi=100)
    ax = fig.subplots(1, 1)
    days = [date.fromisoformat(d) for d in data.days]
    ax.plot(
        days,
        list(data.daily_peak_kva),
        color=DEMAND,
        linewidth=1.0,
        marker="." if len(days) < 60 else None,
        label="Daily peak 15-minute demand",
    )
    if data.peak_day:
        pd = date.fromisoformat(data.peak_day)
        ax.plot(
            [pd],
            [data.peak_kva],
            linestyle="none",
            marker="v",
            markersize=8,
            color=LIMIT,
            label=f"Peak {data.peak_kva:,.1f} kVA ({data.peak_day})",
        )
    if data.existing_load_kva is not None:
        ax.axhline(
            data.existing_load_kva,
            color=FUTURE,
            linestyle="--",
            linewidth=1.2,
            label=f"Existing load × 125 % = {data.existing_load_kva:,.1f} kVA (NEC 220.87)",
        )
    ax.set_ylabel("Demand (kVA)")
    ax.set_xlabel("Date")
    ax.set_ylim(bottom=0, top=max([data.peak_kva, data.existing_load_kva or 0.0, 1.0]) * 1.15)
    ax.grid(True, color="#d0d5dd", linewidth=0.6)
    ax.legend(loc="lower right", fontsize=8, frameon=True, framealpha=0.92, edgecolor="#d0d5dd")
    ax.set_title(data.title, fontsize=10, color=INK)
    locator = AutoDateLocator()
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(ConciseDateFormatter(locator))
    return _svg(fig, data.title)
