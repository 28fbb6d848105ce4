"""``panelwright balance FILE --panel TAG``: propose slot moves that even out a panel's phases.

Prints the phase loading before and after, the proven lower bound and gap, and the moves (with
the safety caution), or with ``--json`` the proposal object (caution on stderr so standard
output stays plain JSON).  ``--out NEW_FILE`` writes the whole project with the proposal
applied, after checking that it parses again.  ``--transformer TAG`` instead balances a
transformer secondary: every panel on it is balanced and a feeder rotation is proposed for each
rotatable panel (see :func:`server.calc.balance.balance_transformer`); ``--out`` then also
stores each panel's proposed ``feeder_rotation``.

Moves are a permutation applied at once: each ``{"from_slot", "to_slot"}`` says the breaker
whose first slot is ``from_slot`` gets first slot ``to_slot``; undo by swapping the two.
Bad input exits with status 2 and a message naming the file, panel tag, slot and field.
"""

from __future__ import annotations

import json
from pathlib import Path

import click

from server import formatting as fmt
from server.calc.balance import (
    BalanceOptions,
    BalanceProposal,
    Objective,
    TransformerBalanceProposal,
    balance_panel_in_project,
    balance_transformer,
    rotation_landing,
)
from server.calc.errors import CalcError, ProjectFileError
from server.calc.model import Panel, Project
from server.calc.projectfile import dump_project, load_project_file, parse_project, replace_panel

from . import CAUTION, fail

OBJECTIVE_WORDS = {
    Objective.MAX_PHASE: "smallest largest-phase load (VA)",
    Objective.NEUTRAL: "least neutral current",
}


@click.command("balance")
@click.argument("file", metavar="FILE")
@click.option("--panel", "panel_tag", metavar="TAG", help="Tag of the panel to balance.")
@click.option(
    "--transformer",
    "transformer_tag",
    metavar="TAG",
    help="Balance a transformer secondary instead: every panel on it, plus feeder rotations.",
)
@click.option(
    "--objective",
    type=click.Choice([o.value for o in Objective]),
    default=Objective.MAX_PHASE.value,
    show_default=True,
    help="max-phase: smallest largest-phase VA; neutral: least phasor neutral current.",
)
@click.option("--max-moves", type=click.IntRange(min=0), default=None, help="Move at most N breakers.")
@click.option("--keep-sides", is_flag=True, help="Keep every breaker on its side of the panel.")
@click.option("--allow-spaces", is_flag=True, help="Let breakers move into empty slots and spaces.")
@click.option(
    "--tolerance",
    "tolerance_pct",
    type=click.FloatRange(min=0.0, max=100.0),
    default=0.0,
    show_default=True,
    help="Fewest moves among arrangements within this % of the best found.",
)
@click.option(
    "--fewest-moves",
    is_flag=True,
    help="Always run the exact fewest-moves step (slower on large panels; proves the move count).",
)
@click.option(
    "--include-future/--no-include-future",
    "include_future",
    default=None,
    help="Count (or leave out) circuits marked future; default: the project's own setting.",
)
@click.option(
    "--time-limit",
    "time_limit_s",
    type=click.FloatRange(min=0.1, max=600.0),
    default=5.0,
    show_default=True,
    help="Seconds per exact-solver step.",
)
@click.option("--json", "as_json", is_flag=True, help="Print the proposal as JSON instead of the report.")
@click.option("--out", "out_file", metavar="NEW_FILE", help="Write the project with the proposal applied to NEW_FILE.")
def command(
    file: str,
    panel_tag: str | None,
    transformer_tag: str | None,
    objective: str,
    max_moves: int | None,
    keep_sides: bool,
    allow_spaces: bool,
    tolerance_pct: float,
    fewest_moves: bool,
    include_future: bool | None,
    time_limit_s: float,
    as_json: bool,
    out_file: str | None,
) -> None:
    """Propose slot moves for panel TAG of FILE that balance its phases."""
    if (panel_tag is None) == (transformer_tag is None):
        fail(f"{file}: give exactly one of --panel TAG or --transformer TAG")
    if out_file is not None and _same_file(file, out_file):
        fail(f"{out_file}: --out must name a new file, not the input file (the original is kept)")
    try:
        project = load_project_file(file)
    except ProjectFileError as exc:
        fail(exc.describe())
    options = BalanceOptions(
        objective=Objective(objective),
        max_moves=max_moves,
        keep_sides=keep_sides,
        allow_spaces=allow_spaces,
        include_future=include_future,
        tolerance_pct=tolerance_pct,
        time_limit_s=time_limit_s,
        fewest_moves=fewest_moves,
    )
    try:
        if panel_tag is not None:
            proposal: BalanceProposal | TransformerBalanceProposal = balance_panel_in_project(
                project, panel_tag, options
            )
            panels = (proposal.panel,)
        else:
            proposal = balance_transformer(project, transformer_tag or "", options)
            panels = proposal.applied_panels()  # in-panel moves and each panel's feeder_rotation
    except ProjectFileError as exc:
        exc.source = exc.source or file
        fail(exc.describe())
    except (CalcError, ValueError) as exc:
        fail(f"{file}: cannot balance {panel_tag or transformer_tag}: {exc}")

    if out_file is not None:
        _write(project, panels, out_file)
    if as_json:
        data = proposal.to_json()
        if out_file is not None:
            data["written_to"] = out_file
        click.echo(json.dumps(data, indent=2, ensure_ascii=False, allow_nan=False))
        click.echo(f"CAUTION: {CAUTION}", err=True)
        return
    if isinstance(proposal, BalanceProposal):
        lines = panel_report(proposal)
    else:
        lines = transformer_report(proposal)
    if out_file is not None:
        lines.append(f"Written with the proposal applied: {out_file}")
    lines.extend(["", f"CAUTION: {CAUTION}"])
    click.echo("\n".join(lines))


def _same_file(a: str, b: str) -> bool:
    try:
        return Path(a).resolve() == Path(b).resolve()
    except OSError:
        return False


def _write(project: Project, panels: tuple[Panel, ...], out_file: str) -> None:
    """Write the project with ``panels`` replaced, after checking it parses again."""
    new = project
    for panel in panels:
        new = replace_panel(new, panel)
    data = dump_project(new)
    try:
        parse_project(data, source=out_file)
    except ProjectFileError as exc:  # a proposal that breaks a rule is never written
        fail(f"{out_file}: not written, the proposal fails validation: {exc.describe()}")
    text = json.dumps(data, indent=2, ensure_ascii=False) + "\n"
    try:
        Path(out_file).write_text(text, encoding="utf-8")
    except OSError as exc:
        fail(f"{out_file}: cannot write ({exc.strerror})")


def _loading_rows(p: BalanceProposal) -> list[str]:
    rows = [f"  {'':<16}{'before':>14}{'after':>14}"]
    for phase in p.before.phase_va:
        rows.append(
            f"  {'phase ' + phase + ' (VA)':<16}{fmt.va(p.before.phase_va[phase]):>14}{fmt.va(p.after.phase_va[phase]):>14}"
        )
    rows.append(f"  {'largest (VA)':<16}{fmt.va(p.before.max_phase_va):>14}{fmt.va(p.after.max_phase_va):>14}")
    rows.append(f"  {'imbalance':<16}{fmt.pct(p.before.imbalance_pct):>14}{fmt.pct(p.after.imbalance_pct):>14}")
    if p.before.neutral_amps is not None:
        rows.append(f"  {'neutral (A)':<16}{fmt.amps(p.before.neutral_amps):>14}{fmt.amps(p.after.neutral_amps):>14}")
    return rows


def panel_report(p: BalanceProposal) -> list[str]:
    lines = [
        f"BALANCE PANEL {p.panel_tag}  {p.system}",
        f"  aim: {OBJECTIVE_WORDS[p.options.objective]}"
        + (f"; at most {p.options.max_moves} moves" if p.options.max_moves is not None else "")
        + ("; sides kept" if p.options.keep_sides else "")
        + ("; empty slots and spaces usable" if p.options.allow_spaces else ""),
        *_loading_rows(p),
        f"  proven lower bound on the largest phase: {fmt.va(p.lower_bound_va)} VA",
    ]
    if p.lower_bound_neutral_amps is not None:
        lines.append(f"  proven lower bound on the neutral current: {fmt.amps(p.lower_bound_neutral_amps)} A")
    if p.gap_pct is None:
        lines.append("  gap: not defined (the bound is zero)")
    else:
        verdict = "optimal" if p.proven_optimal else "at most this far from the optimum"
        lines.append(f"  gap: {fmt.pct(p.gap_pct, 3)} ({verdict})")
    if not p.moves:
        lines.append("  no moves: the present arrangement is already the best found")
    else:
        minimal = "fewest possible" if p.moves_minimal else "few, not proven fewest"
        lines.append(f"  moves, all made at once ({p.breaker_moves} breakers, {minimal}):")
        for m in p.moves:
            c = p.panel.circuit_at(m.to_slot)
            what = ""
            if c is not None:
                if c.is_space:
                    what = "space"
                else:
                    load = f"{fmt.va(c.va)} VA" if c.va is not None else (f"feeds {c.feeds}" if c.feeds else "")
                    what = f"{c.poles}-pole {c.description or '(no description)'} {load}".rstrip()
            lines.append(f"    slot {m.from_slot:>3} → slot {m.to_slot:<3}  {what}")
    for note in p.notes:
        lines.append(f"  note: {note}")
    return lines


def transformer_report(t: TransformerBalanceProposal) -> list[str]:
    lines = [f"BALANCE TRANSFORMER {t.transformer_tag}  secondary {t.secondary}"]
    lines.append(f"  {'':<16}{'before':>14}{'after':>14}")
    for phase in t.before_phase_va:
        lines.append(
            f"  {'phase ' + phase + ' (VA)':<16}{fmt.va(t.before_phase_va[phase]):>14}{fmt.va(t.after_phase_va[phase]):>14}"
        )
    lines.append("  feeder landings:")
    for r in t.rotations:
        if not r.rotatable:
            lines.append(f"    {r.panel_tag}: not rotatable, land as labelled")
        elif r.feeder_rotation == 0:
            lines.append(f"    {r.panel_tag}: as labelled")
        else:
            lines.append(f"    {r.panel_tag}: land its feeder rotated ({rotation_landing(r.feeder_rotation)})")
    for p in t.panels:
        lines.append("")
        lines.extend(panel_report(p))
    for note in t.notes:
        lines.append(f"  note: {note}")
    return lines
