"""``panelwright metered FILE.csv``: existing load from metered interval demand (NEC 220.87).

Thin: options → :func:`server.calc.metered.analyze_csv` → text or JSON.  Every number comes
from the calculation layer; this module only formats it (and draws the daily-peak sparkline).
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from pathlib import Path

import click

from server.calc.errors import MeteredDataError
from server.calc.metered import DEFAULT_PF, MeteredResult, analyze_csv

from . import CAUTION, fail

#: Ten ASCII levels, lowest first: the terminal needs no special font.
SPARK_LEVELS = " .:-=+*#%@"
SPARK_WIDTH = 73
MAX_BAD_ROWS_SHOWN = 50


def sparkline(values: Sequence[float], width: int = SPARK_WIDTH) -> str:
    """One line of ASCII levels; longer series are bucketed (the highest value of each bucket)."""
    if not values:
        return ""
    if len(values) > width:
        buckets = []
        for i in range(width):
            lo = i * len(values) // width
            hi = max((i + 1) * len(values) // width, lo + 1)
            buckets.append(max(values[lo:hi]))
        values = buckets
    top = max(values)
    low = min(values)
    span = top - low
    last = len(SPARK_LEVELS) - 1
    if span <= 0:
        return SPARK_LEVELS[last if top > 0 else 0] * len(values)
    return "".join(SPARK_LEVELS[round((v - low) / span * last)] for v in values)


def _bad_rows_text(pairs: Sequence[tuple[int, str]]) -> list[str]:
    lines = [f"  line {line}: {reason}" for line, reason in pairs[:MAX_BAD_ROWS_SHOWN]]
    if len(pairs) > MAX_BAD_ROWS_SHOWN:
        lines.append(f"  ... and {len(pairs) - MAX_BAD_ROWS_SHOWN} more")
    return lines


def render_text(r: MeteredResult) -> str:
    """The terminal report of one recording."""
    out = [f"Metered demand: {r.source}"]
    out.append(f"  Columns        {r.units_note}")
    if r.conversion:
        out.append(f"  Conversion     {r.conversion}")
    out.append(
        f"  Readings       {r.rows:,} rows, {r.interval_minutes:g}-minute interval, "
        f"{r.first.isoformat()} to {r.last.isoformat()} ({r.coverage_days:.1f} days)"
    )
    out.append(
        f"  Data           {r.gaps} missing intervals (gaps), {r.duplicates} duplicates, "
        f"{r.dst_repeats} daylight-saving repeats, {len(r.bad_rows)} bad rows"
    )
    out.append(f"  Demand         {r.demand_window}")
    out.append(f"  Peak           {r.peak_kva:,.1f} kVA at {r.peak_at.isoformat()}")
    for p in r.phase_peaks:
        out.append(f"  Phase {p.phase:<9}{p.peak_kva:,.1f} kVA at {p.peak_at.isoformat()}")
    out.append(f"  Basis          {r.basis.value}")
    if r.existing_load_kva is not None:
        out.append(f"  Existing load  {r.existing_load_kva:,.1f} kVA (maximum demand x 125 %)")
    else:
        out.append("  Existing load  not computed")
    out.append(f"  {r.message}")
    if len(r.daily_peaks) > 1:
        peaks = [d.peak_kva for d in r.daily_peaks]
        out.append(
            f"  Daily peaks    |{sparkline(peaks)}| {min(peaks):,.1f} to {max(peaks):,.1f} kVA, "
            f"{r.daily_peaks[0].day.isoformat()} to {r.daily_peaks[-1].day.isoformat()}"
        )
    if r.bad_rows:
        out.append(f"Bad rows left out ({len(r.bad_rows)}):")
        out += _bad_rows_text([(b.line, b.reason) for b in r.bad_rows])
    if r.notes:
        out.append("Notes:")
        out += [f"  - {n}" for n in r.notes]
    out.append(f"Caution: {CAUTION}")
    return "\n".join(out)


@click.command("metered")
@click.argument("file", type=click.Path(path_type=Path))
@click.option("--pf", type=float, default=DEFAULT_PF, show_default=True, help="Power factor converting kW to kVA")
@click.option("--json", "as_json", is_flag=True, help="Print the result as JSON")
@click.option("--tz", default=None, metavar="Area/City", help="Time zone of timestamps without a UTC offset")
@click.option("--strict", is_flag=True, help="Refuse the whole file when any row is malformed")
@click.option("--volts", type=float, default=None, help="Line-to-neutral volts for amps data without a voltage column")
def command(file: Path, pf: float, as_json: bool, tz: str | None, strict: bool, volts: float | None) -> None:
    """Existing load of a service or feeder from a CSV of interval demand readings (NEC 220.87).

    FILE has a timestamp column and demand columns in kW, kVA, W or VA (a total and/or one per
    phase, e.g. kW_A,kW_B,kW_C), or amps per phase with a voltage.  Bad rows are listed with
    their line numbers and left out, or with --strict the file is refused whole.
    """
    try:
        result = analyze_csv(file, pf=pf, tz=tz, strict=strict, volts=volts)
    except MeteredDataError as exc:
        message = str(exc)
        if exc.bad_rows:
            message += "\n" + "\n".join(_bad_rows_text(list(exc.bad_rows)))
        fail(message)
    except Exception as exc:  # a fault of ours must still reach the user as a message, not a traceback
        fail(f"{file}: could not be analysed ({type(exc).__name__}: {exc}); please report this file")
    if as_json:
        click.echo(json.dumps(result.to_json() | {"caution": CAUTION}, indent=2))
    else:
        click.echo(render_text(result))
