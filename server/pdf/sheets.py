"""One typed context per sheet of the PDF set, built from the engine's result objects.

Nothing is calculated here: each sheet selects the input model and the
:mod:`server.calc.results` objects it prints, lays panel slots out in panelboard order and
says which rows and values carry a revision delta marker.  Numbers are formatted in the
templates with :mod:`server.formatting` (the same filters as the screens);
:func:`printed_values` applies the same filters to the same fields so deltas compare
exactly what the sheets print.
"""

from __future__ import annotations

from collections.abc import Callable, Collection, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from server import __version__
from server import formatting as fmt
from server.calc.model import Category, Circuit, Panel, Project, Source, Status, Transformer
from server.calc.results import (
    CalcWarning,
    CategoryDemand,
    PanelResult,
    ProjectResult,
    SourceResult,
    TransformerResult,
)
from server.calc.systems import SYSTEMS, breaker_slots, slot_phase
from server.commands import CAUTION

from .deltas import NO_DELTAS, Deltas

# --------------------------------------------------------------------------- paper


@dataclass(frozen=True)
class Paper:
    """Sheet size and where the title block strip sits (right edge landscape, bottom portrait)."""

    name: str
    width_in: float
    height_in: float

    @property
    def landscape(self) -> bool:
        return self.width_in > self.height_in

    @property
    def css_size(self) -> str:
        return f"{self.width_in:g}in {self.height_in:g}in"

    @property
    def css_margin(self) -> str:
        # The title-block strip is 3.2 in wide on the right (landscape) or 3.0 in tall at the
        # bottom (portrait): room for the 2.5 in seal box plus its frame.
        if self.landscape:
            return "0.45in 3.55in 0.45in 0.45in"
        return "0.45in 0.45in 3.35in 0.45in"

    @property
    def body_width_in(self) -> float:
        return self.width_in - 0.9

    @property
    def strip_height_in(self) -> float:
        """Height of the landscape title-block strip: the body height plus the frame's 0.2 in each side."""
        return self.height_in - 0.9 + 0.4

    @property
    def strip_width_in(self) -> float:
        """Width of the portrait title-block strip: the body width plus the frame's 0.2 in each side."""
        return self.width_in - 0.9 + 0.4


PAPERS: dict[str, Paper] = {
    "letter-portrait": Paper("letter-portrait", 8.5, 11.0),
    "letter-landscape": Paper("letter-landscape", 11.0, 8.5),
    "tabloid-portrait": Paper("tabloid-portrait", 11.0, 17.0),
    "tabloid-landscape": Paper("tabloid-landscape", 17.0, 11.0),
}


# --------------------------------------------------------------------------- revisions


@dataclass(frozen=True)
class RevisionInfo:
    """One issued revision of the set."""

    number: int
    date: str  # ISO date as issued (text: the title block prints it as given)
    description: str = ""
    issued_by: str = ""


@dataclass(frozen=True)
class IssueHistory:
    """The revision being issued, the earlier ones, and which sheets each revision changed.

    ``touched[n]`` is the set of sheet keys changed by revision ``n`` (``None``: every sheet,
    as for a first issue).  The current revision's entry is derived from ``deltas``.
    """

    current: RevisionInfo | None = None  # None: a draft print, not an issued revision
    earlier: tuple[RevisionInfo, ...] = ()  # oldest first
    touched: Mapping[int, frozenset[str] | None] = field(default_factory=dict)
    deltas: Deltas = NO_DELTAS
    first_issue: bool = True  # no previous issued file to compare with: the whole set is new

    def all(self) -> tuple[RevisionInfo, ...]:
        return (*self.earlier, self.current) if self.current else self.earlier

    def for_sheet(self, key: str, touched_now: bool) -> tuple[RevisionInfo, ...]:
        out = []
        for rev in self.earlier:
            t = self.touched.get(rev.number)
            if t is None or key in t:
                out.append(rev)
        if self.current is not None and (self.first_issue or touched_now):
            out.append(self.current)
        return tuple(out)


DRAFT = IssueHistory()


# --------------------------------------------------------------------------- title block


CATEGORY_SHORT: dict[str, str] = {
    Category.LIGHTING: "LTG",
    Category.RECEPTACLE: "RCPT",
    Category.MOTOR: "MTR",
    Category.COOLING: "COOL",
    Category.HEATING: "HEAT",
    Category.KITCHEN: "KIT",
    Category.EV_CHARGING: "EV",
    Category.EQUIPMENT: "EQPT",
    Category.SPARE: "SPARE",
}
CATEGORY_LABEL: dict[str, str] = {
    Category.LIGHTING: "Lighting",
    Category.RECEPTACLE: "Receptacles",
    Category.MOTOR: "Motors",
    Category.COOLING: "Cooling",
    Category.HEATING: "Heating",
    Category.KITCHEN: "Kitchen equipment",
    Category.EV_CHARGING: "EV charging",
    Category.EQUIPMENT: "Equipment",
    Category.SPARE: "Spare",
}
STATUS_SHORT: dict[str, str] = {
    Status.EXISTING: "EX",
    Status.NEW: "N",
    Status.FUTURE: "FUT",
    Status.REMOVED: "REM",
}


def category_label(category: str) -> str:
    return CATEGORY_LABEL.get(category, category.replace("_", " ").capitalize())


@dataclass(frozen=True)
class TitleBlock:
    firm: str
    project_name: str
    project_number: str
    client: str
    address: str
    sheet_title: str
    sheet_number: str
    revision: RevisionInfo | None  # the sheet's latest revision (None: draft)
    revisions: tuple[RevisionInfo, ...]  # every revision that changed this sheet
    drawn_by: str
    checked_by: str
    code: str
    basis: str
    caution: str
    draft: bool


def basis_text(project: Project, result: ProjectResult) -> str:
    edition = project.project.code
    future = "future loads included" if result.include_future else "future loads excluded"
    return (
        f"Calculated by Panelwright {__version__} per NFPA 70 (NEC), {edition.year} edition: Article 220 demand, "
        f"Table 310.16 ampacity, Chapter 9 Table 9 voltage drop, ohmic-method fault current; {future}."
    )


# --------------------------------------------------------------------------- panel schedule


@dataclass(frozen=True)
class SlotCell:
    """What one side of one schedule row prints."""

    slot: int
    kind: str  # "load" (first pole of a breaker), "pole" (further pole), "space", "empty"
    description: str = ""
    category: str = ""
    breaker: str = ""  # "20/1": trip amps / poles
    status: str = ""
    va: float | None = None  # VA of the circuit on this row's phase
    counted: bool = True
    changed: bool = False


@dataclass(frozen=True)
class ScheduleRow:
    phase: str
    left: SlotCell
    right: SlotCell


@dataclass(frozen=True)
class DemandRow:
    label: str
    step: CategoryDemand
    changed: bool


@dataclass(frozen=True)
class PanelSheet:
    """Context of one panel schedule sheet."""

    title: TitleBlock
    panel: Panel
    result: PanelResult
    phases: tuple[str, ...]
    rows: tuple[ScheduleRow, ...]
    demand_rows: tuple[DemandRow, ...]
    changed: frozenset[str]  # value keys carrying a delta marker
    new: bool  # the whole panel is new since the previous revision
    delta_rev: int | None
    sccr_ok: bool | None  # None when either number is unknown
    vd_feeder_limit_pct: float
    vd_total_limit_pct: float
    warnings: tuple[CalcWarning, ...]
    fed_from_slot: str  # "MDP slot 7" when fed by a breaker


def _breaker_text(c: Circuit) -> str:
    if c.breaker_amps is None:
        return f"—/{c.poles}"
    return f"{c.breaker_amps}/{c.poles}"


def _description(c: Circuit) -> str:
    if c.feeds:
        return f"{c.description} → {c.feeds}".strip() if c.description else f"Feeds {c.feeds}"
    return c.description


def schedule_rows(panel: Panel, result: PanelResult, deltas: Deltas) -> tuple[ScheduleRow, ...]:
    """Rows in panelboard order: odd slots left, even right; one bus phase per row."""
    spec = SYSTEMS[panel.system]
    by_slot = {cr.slot: cr for cr in result.circuits}
    cells: dict[int, SlotCell] = {}
    for c in panel.circuits:
        cr = by_slot.get(c.slot)
        if c.is_space:
            cells[c.slot] = SlotCell(
                c.slot, "space", description=c.description or "Space", changed=deltas.circuit(panel.tag, c.slot)
            )
            continue
        counted = cr.counted if cr is not None else c.counts(False)
        for i, s in enumerate(breaker_slots(c.slot, c.poles)):
            phase = slot_phase(spec, s)
            on_phase = cr.phase_va.get(phase) if cr is not None else None
            if i == 0:
                cells[s] = SlotCell(
                    s,
                    "load",
                    description=_description(c),
                    category=CATEGORY_SHORT.get(c.effective_category, ""),
                    breaker=_breaker_text(c),
                    status=STATUS_SHORT.get(c.status, ""),
                    va=on_phase,
                    counted=counted,
                    changed=deltas.circuit(panel.tag, c.slot),
                )
            else:
                cells[s] = SlotCell(s, "pole", va=on_phase, counted=counted)
    rows = []
    n_rows = (panel.spaces + 1) // 2
    for r in range(1, n_rows + 1):
        left, right = 2 * r - 1, 2 * r
        rows.append(
            ScheduleRow(
                phase=slot_phase(spec, left),
                left=cells.get(left) or SlotCell(left, "empty", changed=deltas.circuit(panel.tag, left)),
                right=(
                    cells.get(right) or SlotCell(right, "empty", changed=deltas.circuit(panel.tag, right))
                    if right <= panel.spaces
                    else SlotCell(right, "none")
                ),
            )
        )
    return tuple(rows)


# --------------------------------------------------------------------------- printed values

# key -> function(result) -> printed text, using the same filters as the templates.
Printer = Callable[[Any], str]


def _feeder_attr(name: str, f: Callable[[Any], str]) -> Printer:
    return lambda r: fmt.DASH if r.feeder is None else f(getattr(r.feeder, name))


PANEL_PRINTED: dict[str, Printer] = {
    "connected_va_total": lambda r: fmt.va(r.connected_va_total),
    "demand_va": lambda r: fmt.va(r.demand_va),
    "design_amps": lambda r: fmt.amps(r.design_amps),
    "neutral_amps": lambda r: fmt.amps(r.neutral_amps),
    "imbalance_pct": lambda r: fmt.pct(r.imbalance_pct),
    "capacity_pct": lambda r: fmt.pct(r.capacity_pct),
    "fault_ka": lambda r: fmt.ka(r.fault_ka),
    "feeder.conductor": _feeder_attr("conductor", fmt.text),
    "feeder.sets": _feeder_attr("sets", str),
    "feeder.ocpd_amps": _feeder_attr("ocpd_amps", fmt.rating),
    "feeder.egc": _feeder_attr("egc", fmt.text),
    "feeder.neutral": _feeder_attr("neutral", fmt.text),
    "feeder.ampacity_amps": _feeder_attr("ampacity_amps", fmt.amps),
    "feeder.voltage_drop_pct": _feeder_attr("voltage_drop_pct", lambda v: fmt.pct(v, 2)),
    "feeder.cumulative_voltage_drop_pct": _feeder_attr("cumulative_voltage_drop_pct", lambda v: fmt.pct(v, 2)),
}

TRANSFORMER_PRINTED: dict[str, Printer] = {
    "load_kva": lambda r: fmt.kva(r.load_kva),
    "loading_pct": lambda r: fmt.pct(r.loading_pct),
    "fla_primary": lambda r: fmt.amps(r.fla_primary),
    "fla_secondary": lambda r: fmt.amps(r.fla_secondary),
    "secondary_fault_ka": lambda r: fmt.ka(r.secondary_fault_ka),
    "suggested_kva": lambda r: fmt.kva(r.suggested_kva),
    "primary_ocpd_amps": lambda r: fmt.rating(r.primary_ocpd_amps),
    "secondary_ocpd_amps": lambda r: fmt.rating(r.secondary_ocpd_amps),
    "k_factor_suggested": lambda r: fmt.text(r.k_factor_suggested),
    "feeder": lambda r: fmt.DASH if r.feeder is None else r.feeder.describe(),
}

SOURCE_PRINTED: dict[str, Printer] = {
    "connected_va": lambda r: fmt.va(r.connected_va),
    "demand_va": lambda r: fmt.va(r.demand_va),
    "design_amps": lambda r: fmt.amps(r.design_amps),
    "fault_ka": lambda r: fmt.ka(r.fault_ka),
}


def _demand_key(step: CategoryDemand) -> str:
    return f"demand.{step.category}"


def _demand_text(step: CategoryDemand) -> str:
    return f"{fmt.va(step.connected_va)} {fmt.factor(step.factor)} {fmt.va(step.demand_va)}"


def printed_values(project: Project, result: ProjectResult) -> dict[str, dict[str, str]]:
    """Element tag → value key → the text its sheet prints (for revision deltas)."""
    out: dict[str, dict[str, str]] = {}
    for panel in project.panels:
        r = result.panels.get(panel.tag)
        if r is None:
            continue
        values = {k: f(r) for k, f in PANEL_PRINTED.items()}
        for p in r.connected_va:
            values[f"phase_va.{p}"] = fmt.va(r.connected_va[p])
        for p in r.line_amps:
            values[f"line_amps.{p}"] = fmt.amps(r.line_amps[p])
        for step in r.demand_steps:
            values[_demand_key(step)] = _demand_text(step)
        by_slot = {cr.slot: cr for cr in r.circuits}
        for c in panel.circuits:
            cr = by_slot.get(c.slot)
            if c.feeds and cr is not None:  # a computed load: its printed VA may change
                values[f"circuit.{c.slot}"] = " ".join(fmt.va(v) for _, v in sorted(cr.phase_va.items()))
        out[panel.tag] = values
    for t in project.transformers:
        r = result.transformers.get(t.tag)
        if r is not None:
            out[t.tag] = {k: f(r) for k, f in TRANSFORMER_PRINTED.items()}
    for s in project.sources:
        r = result.sources.get(s.tag)
        if r is not None:
            values = {k: f(r) for k, f in SOURCE_PRINTED.items()}
            for step in r.demand_steps:
                values[_demand_key(step)] = _demand_text(step)
            out[s.tag] = values
    out[WARNINGS_KEY] = {_warning_key(w): w.message for w in all_warnings(result)}
    return out


WARNINGS_KEY = "*warnings*"


def _warning_key(w: CalcWarning) -> str:
    return f"{w.code.value}|{w.tag}|{w.slot if w.slot is not None else ''}"


def all_warnings(result: ProjectResult) -> tuple[CalcWarning, ...]:
    """Every warning of the project once, in element order (project-level first)."""
    seen: set[tuple[str, str, int | None, str]] = set()
    out: list[CalcWarning] = []
    groups: Iterable[Sequence[CalcWarning]] = (
        result.warnings,
        *(p.warnings for p in result.panels.values()),
        *(t.warnings for t in result.transformers.values()),
    )
    for group in groups:
        for w in group:
            key = (w.code.value, w.tag, w.slot, w.message)
            if key not in seen:
                seen.add(key)
                out.append(w)
    return tuple(out)


# --------------------------------------------------------------------------- other sheets


@dataclass(frozen=True)
class TransformerRow:
    transformer: Transformer
    result: TransformerResult
    changed: frozenset[str]
    new: bool


@dataclass(frozen=True)
class TransformerSheet:
    title: TitleBlock
    service: str
    rows: tuple[TransformerRow, ...]
    delta_rev: int | None


@dataclass(frozen=True)
class LoadCalcSheet:
    title: TitleBlock
    source: Source
    result: SourceResult
    demand_rows: tuple[DemandRow, ...]
    changed: frozenset[str]
    delta_rev: int | None
    code: str
    edition_year: int
    occupancy: str
    fed_panels: tuple[str, ...]  # elements fed straight from the source


@dataclass(frozen=True)
class WarningRow:
    warning: CalcWarning
    changed: bool


@dataclass(frozen=True)
class WarningsSheet:
    title: TitleBlock
    service: str
    part: int  # 1-based part of this service's warnings
    parts: int
    rows: tuple[WarningRow, ...]
    delta_rev: int | None


@dataclass(frozen=True)
class GrowthRow:
    """One snapshot of a growth chart as printed in the table under it (kVA; ``None``: absent)."""

    label: str
    connected_kva: float | None
    demand_kva: float | None
    demand_future_kva: float | None

    @property
    def future_kva(self) -> float | None:
        if self.demand_kva is None or self.demand_future_kva is None:
            return None
        return self.demand_future_kva - self.demand_kva


@dataclass(frozen=True)
class GrowthChart:
    """A service's load-growth chart exactly as the browser's Growth page draws it.

    ``svg`` is :func:`server.charts.growth_chart_svg` of
    ``Growth(services).series(pid, tag).chart_data()`` (issued revisions and the working copy);
    the sheet embeds that text inline, so the sheet's HTML (and its cache key) changes whenever
    a plotted value does.  Built by :func:`server.pdf.stored.growth_charts`.
    """

    tag: str
    svg: str
    rows: tuple[GrowthRow, ...]


@dataclass(frozen=True)
class GrowthSheet:
    title: TitleBlock
    chart: GrowthChart
    delta_rev: int | None


@dataclass(frozen=True)
class IndexEntry:
    number: str
    title: str
    revision: str


@dataclass(frozen=True)
class CoverSheet:
    """The cover (project, revisions, notes and the first part of the index) or an index continuation."""

    title: TitleBlock
    project: Project
    entries: tuple[IndexEntry, ...]
    columns: tuple[tuple[IndexEntry, ...], ...]  # entries split into the columns printed
    continuation: bool
    history: tuple[RevisionInfo, ...]
    include_future: bool
    code: str
    caution: str
    basis: str
    delta_rev: int | None


# --------------------------------------------------------------------------- the set

#: Rows of warnings per warnings sheet: long lists are split so that an edit re-renders (and
#: re-caches) one short sheet rather than one long one.
WARNINGS_PER_SHEET = 40


@dataclass(frozen=True)
class SheetSpec:
    """One sheet to render: which template, its context, and how to find it with ``--sheets``."""

    key: str  # stable identity: panel tag, source tag, "*transformers*:S", "*warnings*:S:n", "*index*:n"
    number: str
    title: str
    template: str
    context: Any
    aliases: frozenset[str]  # what --sheets may name it by (tags, sheet number)
    touched: bool = True  # changed by the revision being issued


@dataclass(frozen=True)
class _Plan:
    key: str
    title: str
    kind: str
    aliases: frozenset[str]
    touched: bool
    payload: Any = None


def _changed_keys(deltas: Deltas, tag: str) -> frozenset[str]:
    return frozenset(k for t, k in deltas.values if t == tag)


def service_of(project: Project) -> dict[str, str]:
    """Element tag → tag of the source at the root of its tree."""
    parent: dict[str, str] = {}
    for p in project.panels:
        for c in p.circuits:
            if c.feeds:
                parent[c.feeds] = p.tag
    for e in (*project.transformers, *project.panels):
        if e.tag not in parent and e.fed_from:
            parent[e.tag] = e.fed_from
    sources = {s.tag for s in project.sources}
    out: dict[str, str] = {}
    for tag in parent:
        node, seen = tag, set()
        while node in parent and node not in seen:
            seen.add(node)
            node = parent[node]
        if node in sources:
            out[tag] = node
    for s in sources:
        out[s] = s
    return out


def _plans(project: Project, result: ProjectResult, deltas: Deltas, growth: Collection[str] = ()) -> list[_Plan]:
    """The sheets after the index, in order, grouped by service (so one edit touches one
    stretch of the set and of its index): the load calculation, the load growth (services
    named in ``growth``), the transformer schedule, the panels, then that service's warnings
    in parts.

    A growth sheet counts as changed by every revision: each issue adds a point to its chart."""
    service = service_of(project)
    panels_of: dict[str, list[Panel]] = {}
    for p in project.panels:
        if p.tag in result.panels:
            panels_of.setdefault(service.get(p.tag, ""), []).append(p)
    wchanged = _changed_keys(deltas, WARNINGS_KEY)
    warnings_of: dict[str, list[CalcWarning]] = {}
    for w in all_warnings(result):
        warnings_of.setdefault(service.get(w.tag, ""), []).append(w)

    def panel_plan(p: Panel) -> _Plan:
        return _Plan(p.tag, f"Panel schedule — {p.tag}", "panel", frozenset({p.tag}), deltas.touches(p.tag))

    def warning_plans(svc: str) -> list[_Plan]:
        ws = warnings_of.get(svc) or []
        parts = [ws[k : k + WARNINGS_PER_SHEET] for k in range(0, len(ws), WARNINGS_PER_SHEET)]
        label = f"service {svc}" if svc else "not under a service"
        out = []
        for n, part in enumerate(parts, start=1):
            rows = tuple(WarningRow(w, _warning_key(w) in wchanged) for w in part)
            suffix = f" ({n} of {len(parts)})" if len(parts) > 1 else ""
            out.append(
                _Plan(
                    f"*warnings*:{svc}:{n}",
                    f"Calculation warnings — {label}{suffix}",
                    "warnings",
                    frozenset({"warnings"}),
                    any(r.changed for r in rows),
                    (label, n, len(parts), rows),
                )
            )
        return out

    plans: list[_Plan] = []
    served = set()
    for s in project.sources:
        if s.tag not in result.sources:
            continue
        served.add(s.tag)
        plans.append(
            _Plan(
                s.tag,
                f"Load calculation summary — service {s.tag}",
                "loadcalc",
                frozenset({s.tag}),
                deltas.touches(s.tag),
            )
        )
        if s.tag in growth:
            plans.append(
                _Plan(
                    f"*growth*:{s.tag}",
                    f"Load growth — service {s.tag}",
                    "growth",
                    frozenset({"growth"}),
                    True,
                    s.tag,
                )
            )
        txs = [t for t in project.transformers if service.get(t.tag) == s.tag and t.tag in result.transformers]
        if txs:
            plans.append(
                _Plan(
                    f"*transformers*:{s.tag}",
                    f"Transformer schedule — service {s.tag}",
                    "transformers",
                    frozenset(t.tag for t in txs) | {"transformers"},
                    any(deltas.touches(t.tag) for t in txs),
                    (s.tag, txs),
                )
            )
        plans.extend(panel_plan(p) for p in panels_of.get(s.tag, []))
        plans.extend(warning_plans(s.tag))
    for svc in sorted(set(panels_of) - served):
        plans.extend(panel_plan(p) for p in panels_of[svc])
    for svc in sorted(set(warnings_of) - served):
        plans.extend(warning_plans(svc))
    return plans


def _index_layout(paper: Paper, n_plans: int) -> list[tuple[int, int]]:
    """(start, count) of the plan entries listed on each index sheet.

    The cover lists itself and the first entries in one column; each continuation sheet
    lists two columns.  Entries keep their place, so an edit re-renders only the index
    sheets that list a sheet whose revision changed (and the cover, which lists the set's
    revisions).
    """
    per_col = _index_capacity(paper)
    out = [(0, per_col - 2)]
    start = per_col - 2
    while start < n_plans:
        out.append((start, 2 * per_col))
        start += 2 * per_col
    return out


def touched_sheets(
    project: Project, result: ProjectResult, deltas: Deltas, growth: Collection[str] = ()
) -> frozenset[str]:
    """Keys of the sheets a revision changed: the cover always, continuation index sheets
    that list a changed sheet, and every sheet whose content changed (``growth``: the services
    whose set had a load-growth sheet)."""
    plans = _plans(project, result, deltas, growth)
    keys = {"*index*:1"} | {p.key for p in plans if p.touched}
    for k, (start, count) in enumerate(_index_layout(PAPERS[project.project.paper], len(plans))[1:], start=2):
        if any(p.touched for p in plans[start : start + count]):
            keys.add(f"*index*:{k}")
    return frozenset(keys)


def _index_capacity(paper: Paper) -> int:
    """Index rows that fit one column of a sheet body (7.6 pt type on 12.5 pt rows)."""
    return max(10, int(((paper.height_in - 0.9 - (3.35 if not paper.landscape else 0)) * 72 - 90) / 12.5))


def build_sheets(
    project: Project,
    result: ProjectResult,
    history: IssueHistory = DRAFT,
    *,
    select: Sequence[str] | None = None,
    growth: Mapping[str, GrowthChart] | None = None,
) -> list[SheetSpec]:
    """Every sheet of the set in order: index, per service load calculation, load growth,
    transformers, panels, warnings.

    ``growth`` maps a source tag to its growth chart (a stored project with issued revisions,
    :func:`server.pdf.stored.growth_charts`); services without one get no growth sheet.

    ``select`` keeps only sheets named by tag or sheet number (the index is then included
    only when named).  Unknown names raise ``KeyError`` naming them.
    """
    info = project.project
    paper = PAPERS[info.paper]
    deltas = history.deltas
    drev = history.current.number if history.current is not None and not history.first_issue else None
    basis = basis_text(project, result)
    growth = growth or {}
    plans = _plans(project, result, deltas, growth)

    # The index: the cover holds one column of entries; each continuation sheet two.
    per_col = _index_capacity(paper)
    layout = _index_layout(paper, len(plans))
    n_index = len(layout)
    index_keys = [f"*index*:{k}" for k in range(1, n_index + 1)]
    numbers: dict[str, str] = {}
    for k, key in enumerate(index_keys):
        numbers[key] = "PW-000" if k == 0 else f"PW-000.{k + 1}"
    for i, plan in enumerate(plans, start=1):
        numbers[plan.key] = f"PW-{i:03d}"
    fed_from_slot = {c.feeds: f"{p.tag}, circuit {c.slot}" for p in project.panels for c in p.circuits if c.feeds}

    def title(key: str, sheet_title: str, touched: bool) -> TitleBlock:
        revs = history.for_sheet(key, touched)
        return TitleBlock(
            firm=info.firm,
            project_name=info.name,
            project_number=info.number,
            client=info.client,
            address=info.address,
            sheet_title=sheet_title,
            sheet_number=numbers[key],
            revision=revs[-1] if revs else None,
            revisions=revs,
            drawn_by=info.drawn_by,
            checked_by=info.checked_by,
            code=str(info.code),
            basis=basis,
            caution=CAUTION,
            draft=history.current is None,
        )

    specs: list[SheetSpec] = []
    for plan in plans:
        tb = title(plan.key, plan.title, plan.touched)
        aliases = plan.aliases | {numbers[plan.key]}
        if plan.kind == "panel":
            ctx: Any = _panel_sheet(project, result, plan.key, tb, deltas, drev, fed_from_slot)
        elif plan.kind == "transformers":
            svc, txs = plan.payload
            ctx = TransformerSheet(
                tb,
                svc,
                tuple(
                    TransformerRow(
                        t, result.transformers[t.tag], _changed_keys(deltas, t.tag), t.tag in deltas.new_elements
                    )
                    for t in txs
                ),
                drev,
            )
        elif plan.kind == "growth":
            ctx = GrowthSheet(tb, growth[plan.payload], drev)
        elif plan.kind == "loadcalc":
            src = project.source(plan.key)
            assert src is not None
            sr = result.sources[plan.key]
            changed = _changed_keys(deltas, plan.key)
            ctx = LoadCalcSheet(
                tb,
                src,
                sr,
                tuple(DemandRow(category_label(s.category), s, _demand_key(s) in changed) for s in sr.demand_steps),
                changed,
                drev,
                str(info.code),
                info.code.year,
                str(info.occupancy),
                tuple(e.tag for e in (*project.transformers, *project.panels) if e.fed_from == plan.key),
            )
        else:
            svc, n, parts, rows = plan.payload
            ctx = WarningsSheet(tb, svc, n, parts, rows, drev)
        specs.append(
            SheetSpec(plan.key, numbers[plan.key], plan.title, f"pdf/{plan.kind}.html", ctx, aliases, plan.touched)
        )

    entries = [
        IndexEntry(
            spec.number, spec.title, str(spec.context.title.revision.number) if spec.context.title.revision else "—"
        )
        for spec in specs
    ]
    index_specs = []
    for k, (key, (start, count)) in enumerate(zip(index_keys, layout, strict=True)):
        listed = specs[start : start + count]
        if k == 0:
            t = "Cover and sheet index"
            touched = True
            tb = title(key, t, touched)
            own = IndexEntry(numbers[key], t, str(tb.revision.number) if tb.revision else "—")
            more = (
                [IndexEntry(f"{numbers[index_keys[1]]}…{numbers[index_keys[-1]]}", "Sheet index, continued", "")]
                if n_index > 1
                else []
            )
            chunk = (own, *more, *entries[start : start + count])
            cols = (chunk,)
        else:
            t = f"Sheet index, continued ({k + 1} of {n_index})"
            touched = any(sp.touched for sp in listed)
            tb = title(key, t, touched)
            chunk = tuple(entries[start : start + count])
            cols = tuple(chunk[c * per_col : (c + 1) * per_col] for c in range(2) if chunk[c * per_col :])
        cover = CoverSheet(
            tb, project, chunk, cols, k > 0, history.all(), result.include_future, str(info.code), CAUTION, basis, drev
        )
        aliases = frozenset({numbers[key], "index"} | ({"cover"} if k == 0 else set()))
        index_specs.append(SheetSpec(key, numbers[key], t, "pdf/index.html", cover, aliases, touched))
    every = [*index_specs, *specs]
    if select is None:
        return every
    wanted = [s.strip() for s in select if s.strip()]
    unknown = [w for w in wanted if not any(w in s.aliases for s in every)]
    if unknown:
        raise KeyError(", ".join(unknown))
    return [s for s in every if any(w in s.aliases for w in wanted)]


def _panel_sheet(
    project: Project,
    result: ProjectResult,
    tag: str,
    tb: TitleBlock,
    deltas: Deltas,
    drev: int | None,
    fed_from_slot: Mapping[str, str],
) -> PanelSheet:
    panel = project.panel(tag)
    assert panel is not None
    r = result.panels[tag]
    spec = SYSTEMS[panel.system]
    changed = _changed_keys(deltas, tag)
    sccr_ok = None if panel.sccr_ka is None or r.fault_ka is None else panel.sccr_ka >= r.fault_ka
    return PanelSheet(
        title=tb,
        panel=panel,
        result=r,
        phases=spec.phases,
        rows=schedule_rows(panel, r, deltas),
        demand_rows=tuple(DemandRow(category_label(s.category), s, _demand_key(s) in changed) for s in r.demand_steps),
        changed=changed,
        new=tag in deltas.new_elements,
        delta_rev=drev,
        sccr_ok=sccr_ok,
        vd_feeder_limit_pct=project.project.vd_feeder_pct,
        vd_total_limit_pct=project.project.vd_total_pct,
        warnings=r.warnings,
        fed_from_slot=fed_from_slot.get(tag) or (panel.fed_from or ""),
    )
