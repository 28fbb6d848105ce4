"""``panelwright calc FILE [--json] [--include-future]``: calculate a version-1 project file.

Prints a readable report per source, panel and transformer (with the safety caution and the
code edition), or with ``--json`` the result object of :meth:`ProjectResult.to_json` (the
caution then goes to stderr so standard output stays plain JSON).  A bad file exits with
status 2 and one message per problem naming the file, tag, slot and field.
"""

from __future__ import annotations

import json

import click

from server import formatting as fmt
from server.calc.engine import compute_project
from server.calc.errors import CalcError, ProjectFileError
from server.calc.model import Project
from server.calc.projectfile import load_project_file
from server.calc.results import CalcWarning, PanelResult, ProjectResult, SourceResult, TransformerResult

from . import CAUTION, fail


@click.command("calc")
@click.argument("file", metavar="FILE")
@click.option("--json", "as_json", is_flag=True, help="Print the result as JSON instead of the report.")
@click.option(
    "--include-future/--no-include-future",
    "include_future",
    default=None,
    help="Count (or leave out) circuits marked future; default: the project's own setting.",
)
def command(file: str, as_json: bool, include_future: bool | None) -> None:
    """Calculate FILE: currents, Article 220 demand, feeders, transformers, voltage drop, fault current."""
    try:
        project = load_project_file(file)
    except ProjectFileError as exc:
        fail(exc.describe())
    try:
        result = compute_project(project, include_future=include_future)
    except ProjectFileError as exc:
        exc.source = exc.source or file
        fail(exc.describe())
    except (CalcError, ValueError) as exc:
        fail(f"{file}: cannot calculate: {exc}")
    if as_json:
        click.echo(json.dumps(result.to_json(), indent=2, ensure_ascii=False, allow_nan=False))
        click.echo(f"CAUTION: {CAUTION}", err=True)
        return
    click.echo(report(project, result))


def _phases(values: dict[str, float], unit: str, conv=fmt.amps) -> str:
    return "  ".join(f"{p} {conv(v)}" for p, v in values.items()) + (f" {unit}" if unit else "")


def _warnings(ws: tuple[CalcWarning, ...], indent: str = "    ") -> list[str]:
    return [f"{indent}[{w.severity.value}] {w.code.value}: {w.message}" for w in ws]


def _source(s: SourceResult) -> list[str]:
    lines = [
        f"SOURCE {s.tag}  {s.system}",
        f"  service load: connected {fmt.va_as_kva(s.connected_va)} kVA, calculated (Article 220) "
        f"{fmt.va_as_kva(s.demand_va)} kVA, design current {fmt.amps(s.design_amps)} A",
        f"  line current  {_phases(s.line_amps, 'A')}",
        f"  available fault current {fmt.ka(s.fault_ka) if s.fault_ka is not None else 'infinite bus (not given)'}",
        "  Article 220 steps:",
    ]
    for st in s.demand_steps:
        lines.append(
            f"    {st.category:<14} {fmt.va(st.connected_va):>12} VA → {fmt.va(st.demand_va):>12} VA  ({st.rule})"
        )
    return lines


def _panel(p: PanelResult, feeder_rotation: int = 0) -> list[str]:
    lines = [
        f"PANEL {p.tag}  {p.system}  fed from {p.fed_from or '—'}",
        f"  connected     {_phases(p.connected_va, 'kVA', fmt.va_as_kva)}; total {fmt.va_as_kva(p.connected_va_total)} kVA;"
        f" imbalance {fmt.pct(p.imbalance_pct)}",
        f"  demand        {fmt.va_as_kva(p.demand_va)} kVA (continuous part {fmt.va_as_kva(p.continuous_demand_va)} kVA)",
        f"  line current  {_phases(p.line_amps, 'A')}"
        + ("" if p.neutral_amps is None else f"; neutral {fmt.amps(p.neutral_amps)} A"),
        f"  design        {fmt.amps(p.design_amps)} A = {fmt.pct(p.capacity_pct)} of {fmt.amps(p.capacity_amps, 0)} A"
        f" (lesser of bus and main)",
    ]
    if p.feeder is not None:
        f = p.feeder
        lines.append(
            f"  feeder        {f.describe()}; {fmt.feet(f.length_ft)}; voltage drop {fmt.pct(f.voltage_drop_pct, 2)}"
            f" (from source {fmt.pct(f.cumulative_voltage_drop_pct, 2)})"
        )
    if feeder_rotation:
        lines.append(f"  landing       {fmt.landing(feeder_rotation)} (panel phase → terminal upstream)")
    lines.append(f"  fault         {fmt.ka(p.fault_ka) if p.fault_ka is not None else 'infinite bus'}")
    lines.append(f"  spaces        {p.spaces_used} of {p.spaces_total} used")
    if p.warnings:
        lines.append("  warnings:")
        lines.extend(_warnings(p.warnings))
    return lines


def _transformer(t: TransformerResult) -> list[str]:
    lines = [
        f"TRANSFORMER {t.tag}  {fmt.kva(t.kva)} kVA  {t.primary} → {t.secondary}  fed from {t.fed_from or '—'}",
        f"  load          {fmt.kva(t.load_kva)} kVA = {fmt.pct(t.loading_pct)} of rating; suggested "
        f"{fmt.kva(t.suggested_kva)} kVA (with growth margin)",
        f"  rated current primary {fmt.amps(t.fla_primary)} A, secondary {fmt.amps(t.fla_secondary)} A",
        f"  line current  primary {_phases(t.primary_line_amps, 'A')}; secondary {_phases(t.secondary_line_amps, 'A')}",
        f"  protection (Table 450.3(B)): primary only {t.primary_ocpd_amps} A; or primary "
        f"{t.primary_ocpd_with_secondary_amps} A with secondary {t.secondary_ocpd_amps} A",
        f"  secondary fault {fmt.ka(t.secondary_fault_ka) if t.secondary_fault_ka is not None else 'infinite'}"
        + (f"; suggested K-rating K-{t.k_factor_suggested}" if t.k_factor_suggested else ""),
    ]
    if t.feeder is not None:
        f = t.feeder
        lines.append(
            f"  primary feeder {f.describe()}; voltage drop {fmt.pct(f.voltage_drop_pct, 2)}"
            f" (from source {fmt.pct(f.cumulative_voltage_drop_pct, 2)})"
        )
    if t.warnings:
        lines.append("  warnings:")
        lines.extend(_warnings(t.warnings))
    return lines


def report(project: Project, result: ProjectResult) -> str:
    """The readable report of ``panelwright calc``."""
    info = project.project
    title = info.name + (f" ({info.number})" if info.number else "")
    lines = [
        f"Panelwright calculation: {title}",
        f"Code edition: {result.code} (the adopted edition and local amendments govern)",
        f"Future loads: {'included' if result.include_future else 'not included'}; removed loads never count",
        f"CAUTION: {CAUTION}",
        "",
    ]
    for s in result.sources.values():
        lines.extend(_source(s))
        lines.append("")
    for t in result.transformers.values():
        lines.extend(_transformer(t))
        lines.append("")
    for p in result.panels.values():
        panel = project.panel(p.tag)
        lines.extend(_panel(p, panel.feeder_rotation if panel is not None else 0))
        lines.append("")
    counts = {sev: sum(1 for w in result.warnings if w.severity.value == sev) for sev in ("error", "warning", "note")}
    lines.append(
        f"{len(result.warnings)} warnings: {counts['error']} errors, {counts['warning']} warnings, {counts['note']} notes"
    )
    lines.append(f"CAUTION: {CAUTION}")
    return "\n".join(lines)
