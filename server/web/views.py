"""Typed template contexts, one per page, built from a :class:`~server.services.Snapshot`.

Each context is a frozen dataclass whose fields are documented; templates read only these.
The arithmetic is the engine's: here results are only arranged (rows of a panelboard, boxes
of a riser diagram, the worst warning of a node).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from server.calc.balance import rotation_landing
from server.calc.model import Category, Circuit, CodeEdition, Conduit, Material, Occupancy, Panel, Status, Transformer
from server.calc.projectfile import FEEDER_ROTATIONS, PAPERS, rotation_allowed
from server.calc.results import CalcWarning, CircuitResult, PanelResult, ProjectResult, Severity, TransformerResult
from server.calc.systems import SYSTEMS, breaker_slots, slot_phase
from server.calc.tables import conductor_sizes
from server.services import CIRCUIT_FORM_FIELDS, FEEDER_FORM_FIELDS, PANEL_FORM_FIELDS, ProjectSummary, Snapshot
from server.web.templating import SEVERITY_RANK, Urls, fmt_value

URLS = Urls()


@dataclass(frozen=True)
class Choices:
    """Option lists of the forms (values are the project file's strings)."""

    categories: tuple[str, ...] = tuple(c.value for c in Category)
    statuses: tuple[str, ...] = tuple(s.value for s in Status)
    occupancies: tuple[str, ...] = tuple(o.value for o in Occupancy)
    codes: tuple[str, ...] = tuple(c.value for c in CodeEdition)
    materials: tuple[str, ...] = tuple(m.value for m in Material)
    conduits: tuple[str, ...] = tuple(c.value for c in Conduit)
    systems: tuple[str, ...] = tuple(SYSTEMS)
    papers: tuple[str, ...] = PAPERS
    sizes: tuple[str, ...] = field(default_factory=conductor_sizes)


CHOICES = Choices()


# --------------------------------------------------------------------------- badges and warnings


def worst(warnings: tuple[CalcWarning, ...] | list[CalcWarning]) -> CalcWarning | None:
    """The most severe warning (first of equals), or None."""
    best: CalcWarning | None = None
    for w in warnings:
        if best is None or SEVERITY_RANK.get(w.severity, 0) > SEVERITY_RANK.get(best.severity, 0):
            best = w
    return best


def all_warnings(result: ProjectResult) -> list[CalcWarning]:
    """Every warning of the project once: project-level, then each panel's and transformer's."""
    seen: set[tuple[Any, ...]] = set()
    out: list[CalcWarning] = []
    groups: list[tuple[CalcWarning, ...]] = [result.warnings]
    groups += [p.warnings for p in result.panels.values()]
    groups += [t.warnings for t in result.transformers.values()]
    for group in groups:
        for w in group:
            key = (w.code, w.tag, w.slot, w.message)
            if key not in seen:
                seen.add(key)
                out.append(w)
    out.sort(key=lambda w: (-SEVERITY_RANK.get(w.severity, 0), w.tag, w.slot or 0))
    return out


@dataclass(frozen=True)
class Badge:
    """What a node of the distribution shows everywhere: load, % of its rating, worst warning."""

    tag: str
    kind: str  # "source", "transformer" or "panel"
    url: str
    system: str
    demand_kva: float | None
    pct: float | None  # panel: design current as % of bus/main; transformer: loading %
    pct_label: str
    worst: CalcWarning | None
    warning_count: int

    @property
    def level(self) -> str:
        """CSS level: "error", "warning", "note" or "ok"."""
        return self.worst.severity.value if self.worst else "ok"


def badge(snap: Snapshot, tag: str) -> Badge:
    pid, model, result = snap.project_id, snap.model, snap.result
    if (p := model.panel(tag)) is not None:
        pr = result.panels.get(tag)
        return Badge(
            tag,
            "panel",
            URLS.panel(pid, tag),
            p.system,
            pr.demand_va / 1000.0 if pr else None,
            pr.capacity_pct if pr else None,
            "of rating",
            worst(pr.warnings) if pr else None,
            len(pr.warnings) if pr else 0,
        )
    if (t := model.transformer(tag)) is not None:
        tr = result.transformers.get(tag)
        return Badge(
            tag,
            "transformer",
            URLS.transformer(pid, tag),
            f"{t.primary} → {t.secondary}",
            tr.load_kva if tr else None,
            tr.loading_pct if tr else None,
            "loaded",
            worst(tr.warnings) if tr else None,
            len(tr.warnings) if tr else 0,
        )
    s = model.source(tag)
    sr = result.sources.get(tag)
    # A source has no warnings of its own (server.calc.engine: a service's findings are its main
    # panel's), so its badge needs no pass over the project's warnings on every edit.
    own: tuple = ()
    return Badge(
        tag,
        "source",
        URLS.node(pid, tag, "source"),
        s.system if s else "",
        sr.demand_va / 1000.0 if sr else None,
        None,
        "",
        worst(own),
        len(own),
    )


def ancestors_of(snap: Snapshot, tag: str) -> tuple[str, ...]:
    """Nearest first, up to the source (from the results when present, else from the model)."""
    pr = snap.result.panels.get(tag)
    if pr is not None:
        return pr.ancestors
    tr = snap.result.transformers.get(tag)
    if tr is not None:
        return tr.ancestors
    return tuple(_parents(snap, tag))


def _parents(snap: Snapshot, tag: str) -> list[str]:
    parent_of = parent_map(snap)
    out: list[str] = []
    node = parent_of.get(tag)
    while node is not None and node not in out:
        out.append(node[0])
        node = parent_of.get(node[0])
    return out


def fed_by(snap: Snapshot, tag: str) -> tuple[str, int | None] | None:
    """(parent tag, feeding slot or None) of one element, without scanning the whole project."""
    element = snap.model.panel(tag) or snap.model.transformer(tag)
    if element is None:
        return None
    if element.fed_from:
        return (element.fed_from, None)
    pr = snap.result.panels.get(tag)
    tr = snap.result.transformers.get(tag)
    parent = pr.fed_from if pr else (tr.fed_from if tr else None)
    feeding = snap.model.panel(parent) if parent else None
    if feeding is None:
        return parent_map(snap).get(tag)
    return next(((feeding.tag, c.slot) for c in feeding.circuits if c.feeds == tag), None)


def parent_map(snap: Snapshot) -> dict[str, tuple[str, int | None]]:
    """child tag → (parent tag, feeding slot or None)."""
    out: dict[str, tuple[str, int | None]] = {}
    for p in snap.model.panels:
        for c in p.circuits:
            if c.feeds:
                out[c.feeds] = (p.tag, c.slot)
    for e in (*snap.model.transformers, *snap.model.panels):
        if e.fed_from and e.tag not in out:
            out[e.tag] = (e.fed_from, None)
    return out


# --------------------------------------------------------------------------- base context


@dataclass(frozen=True)
class Page:
    """Fields every page has: the project (if any) and the code edition in force."""

    title: str
    pid: int | None = None
    project_name: str = ""
    project_number: str = ""
    code: str = ""
    archived: bool = False
    section: str = ""  # which navigation tab is current


def page(snap: Snapshot, title: str, section: str) -> Page:
    info = snap.info
    return Page(title, snap.project_id, info.name, info.number, info.code.value, snap.archived, section)


# --------------------------------------------------------------------------- projects


@dataclass(frozen=True)
class ProjectListContext:
    """The project list, with the create form (its values and errors kept after a bad submit)."""

    page: Page
    projects: list[ProjectSummary]
    show_archived: bool
    values: dict[str, str] = field(default_factory=dict)
    errors: dict[str, str] = field(default_factory=dict)
    choices: Choices = CHOICES


@dataclass(frozen=True)
class SettingsContext:
    """Project settings and title block."""

    page: Page
    values: dict[str, str]
    errors: dict[str, str]
    saved: bool = False
    choices: Choices = CHOICES


def settings_values(snap: Snapshot) -> dict[str, str]:
    info = snap.info
    return {k: fmt_value(getattr(info, k)) for k in info.__dataclass_fields__}


# --------------------------------------------------------------------------- panel editor


@dataclass(frozen=True)
class SideCell:
    """One side (left = odd slot, right = even) of one row of a panelboard."""

    kind: str  # "circuit" (a breaker starts here), "covered" (a multi-pole breaker above spans it), "empty"
    slot: int
    side: str  # "L" or "R"
    circuit: Circuit | None = None
    result: CircuitResult | None = None
    rowspan: int = 1
    values: dict[str, str] = field(default_factory=dict)
    errors: dict[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class PairRow:
    """One printed row of a panelboard: slots 2n−1 (left) and 2n (right) on one bus phase."""

    number: int
    phase: str
    left: SideCell
    right: SideCell


def circuit_values(c: Circuit) -> dict[str, str]:
    values = {k: fmt_value(getattr(c, k)) for k in CIRCUIT_FORM_FIELDS}
    values["continuous"] = "" if c.continuous is None else ("yes" if c.continuous else "no")
    return values


def panel_rows(
    panel: Panel,
    result: PanelResult | None,
    *,
    override_slot: int | None = None,
    override_values: dict[str, str] | None = None,
    errors: dict[str, str] | None = None,
    only_rows: range | None = None,
) -> list[PairRow]:
    """The panelboard laid out as the trade reads it; ``override_*`` show a rejected edit as typed.

    ``only_rows``: build just these pair rows (numbered from 1), as an edit's answer needs."""
    spec = SYSTEMS.get(panel.system)
    by_slot = {c.slot: c for c in panel.circuits}
    res = {c.slot: c for c in result.circuits} if result else {}
    covered: set[int] = set()
    for c in panel.circuits:
        if not c.is_space:
            covered.update(breaker_slots(c.slot, c.poles)[1:])
    n_rows = (panel.spaces + 1) // 2

    def cell(slot: int, side: str) -> SideCell:
        if slot > panel.spaces:
            return SideCell("none", slot, side)
        c = by_slot.get(slot)
        if c is not None:
            rows_left = n_rows - (slot + 1) // 2 + 1
            span = min(max(c.poles, 1), rows_left)
            values = circuit_values(c)
            errs: dict[str, str] = {}
            if slot == override_slot:
                values.update(override_values or {})
                errs = errors or {}
            return SideCell("circuit", slot, side, c, res.get(slot), span, values, errs)
        if slot in covered:
            return SideCell("covered", slot, side)
        if slot == override_slot:
            return SideCell("empty", slot, side, errors=errors or {})
        return SideCell("empty", slot, side)

    rows = []
    wanted = range(1, n_rows + 1)
    if only_rows is not None:
        wanted = range(max(1, only_rows.start), min(n_rows, only_rows.stop - 1) + 1)
    for n in wanted:
        phase = slot_phase(spec, 2 * n - 1) if spec else "?"
        rows.append(PairRow(n, phase, cell(2 * n - 1, "L"), cell(2 * n, "R")))
    return rows


@dataclass(frozen=True)
class PanelContext:
    """The panel editor: circuit grid, per-phase totals, summary, header form and upstream badges."""

    page: Page
    panel: Panel
    result: PanelResult | None
    rows: list[PairRow]
    phases: tuple[str, ...]
    upstream: list[Badge]  # from the source down to this panel's parent
    own: Badge
    fed_by: tuple[str, int | None] | None
    feeds: list[Badge]  # what this panel's breakers feed
    header_values: dict[str, str]
    header_errors: dict[str, str]
    row_error: str = ""  # a rejected circuit edit's message not tied to one field
    versions: Mapping[int, int] = field(default_factory=dict)  # slot → Circuit.version, sent back with each edit
    choices: Choices = CHOICES

    @property
    def pid(self) -> int:
        return self.page.pid or 0

    @property
    def landings(self) -> tuple[tuple[str, str], ...]:
        """The "Feeder landing" choices (value, words); empty where the panel cannot be rotated."""
        return feeder_landings(self.panel.system)

    @property
    def feeder_landing(self) -> str:
        """How the panel's feeder is landed, in the installer's words; "" when as labelled."""
        return feeder_landing_words(self.panel.feeder_rotation) if self.panel.feeder_rotation else ""


def feeder_landing_words(rotation: int) -> str:
    """Installer's words for a panel's ``feeder_rotation``."""
    if rotation == 0:
        return f"{rotation_landing(0)} (as labelled)"
    return rotation_landing(rotation)


def feeder_landings(system: str) -> tuple[tuple[str, str], ...]:
    if not rotation_allowed(system):
        return ()
    return tuple((str(r), feeder_landing_words(r)) for r in FEEDER_ROTATIONS)


def panel_header_values(panel: Panel) -> dict[str, str]:
    values = {k: fmt_value(getattr(panel, k)) for k in PANEL_FORM_FIELDS}
    for k in FEEDER_FORM_FIELDS:
        values[f"feeder_{k}"] = fmt_value(getattr(panel.feeder, k))
    return values


def panel_context(
    snap: Snapshot,
    tag: str,
    *,
    override_slot: int | None = None,
    override_values: dict[str, str] | None = None,
    errors: dict[str, str] | None = None,
    header_values: dict[str, str] | None = None,
    header_errors: dict[str, str] | None = None,
    near_slot: int | None = None,
) -> PanelContext:
    """The panel editor's context; with ``near_slot``, only what an edit's answer swaps in: the
    pair rows a breaker at that slot can span (no header form values)."""
    panel = snap.model.panel(tag)
    assert panel is not None
    result = snap.result.panels.get(tag)
    spec = SYSTEMS.get(panel.system)
    only = None if near_slot is None else range((near_slot + 1) // 2, (near_slot + 1) // 2 + 3)
    rows = panel_rows(
        panel, result, override_slot=override_slot, override_values=override_values, errors=errors, only_rows=only
    )
    chain = list(reversed(ancestors_of(snap, tag)))
    hv = panel_header_values(panel) if near_slot is None else {}
    hv.update(header_values or {})
    row_error = (errors or {}).get("", "") or (errors or {}).get("slot", "") or (errors or {}).get("feeds", "")
    return PanelContext(
        page=page(snap, f"Panel {tag}", "tree"),
        panel=panel,
        result=result,
        rows=rows,
        phases=spec.phases if spec else (),
        upstream=[badge(snap, t) for t in chain],
        own=badge(snap, tag),
        fed_by=fed_by(snap, tag),
        feeds=[badge(snap, c.feeds) for c in panel.circuits if c.feeds],
        header_values=hv,
        header_errors=header_errors or {},
        row_error=row_error,
        versions=snap.circuit_versions.get(tag, {}),
    )


# --------------------------------------------------------------------------- transformers


@dataclass(frozen=True)
class TransformerRow:
    transformer: Transformer
    result: TransformerResult | None
    badge: Badge
    fed_by: tuple[str, int | None] | None


@dataclass(frozen=True)
class TransformerScheduleContext:
    """Every transformer of the project with its sizing results."""

    page: Page
    rows: list[TransformerRow]


@dataclass(frozen=True)
class TransformerContext:
    """One transformer: its fields (editable) and its results."""

    page: Page
    row: TransformerRow
    upstream: list[Badge]
    feeds: list[Badge]
    values: dict[str, str]
    errors: dict[str, str]
    choices: Choices = CHOICES


def transformer_row(snap: Snapshot, t: Transformer) -> TransformerRow:
    return TransformerRow(t, snap.result.transformers.get(t.tag), badge(snap, t.tag), fed_by(snap, t.tag))


def transformer_values(t: Transformer) -> dict[str, str]:
    values = {
        k: fmt_value(getattr(t, k))
        for k in (
            "kva",
            "primary",
            "secondary",
            "impedance_pct",
            "x_over_r",
            "loss_pct",
            "k_factor",
            "description",
            "location",
        )
    }
    for k in ("length_ft", "material", "conduit", "sets", "size", "ocpd_amps", "insulation_c", "ambient_c"):
        values[f"feeder_{k}"] = fmt_value(getattr(t.feeder, k))
    return values


def children_of(snap: Snapshot, tag: str) -> list[str]:
    return [child for child, (parent, _slot) in parent_map(snap).items() if parent == tag]


# --------------------------------------------------------------------------- distribution tree


@dataclass(frozen=True)
class TreeNode:
    badge: Badge
    depth: int
    parent: str | None
    via_slot: int | None
    children: tuple[str, ...]


def tree_nodes(snap: Snapshot) -> list[TreeNode]:
    """Depth-first: each source, then what it feeds (in feeding-slot order), indented."""
    pm = parent_map(snap)
    kids: dict[str, list[tuple[int, int, str]]] = {}
    order = {e.tag: i for i, e in enumerate((*snap.model.transformers, *snap.model.panels))}
    for child, (parent, slot) in pm.items():
        kids.setdefault(parent, []).append((slot if slot is not None else -1, order.get(child, 0), child))
    out: list[TreeNode] = []

    def walk(tag: str, depth: int, parent: str | None, via: int | None) -> None:
        children = [c for _, _, c in sorted(kids.get(tag, []))]
        out.append(TreeNode(badge(snap, tag), depth, parent, via, tuple(children)))
        for c in children:
            if depth < 50:
                walk(c, depth + 1, tag, pm[c][1])

    for s in snap.model.sources:
        walk(s.tag, 0, None, None)
    return out


@dataclass(frozen=True)
class RiserBox:
    node: TreeNode
    x: float
    y: float


@dataclass(frozen=True)
class RiserLink:
    x1: float
    y1: float
    x2: float
    y2: float

    @property
    def mid_y(self) -> float:
        return (self.y1 + self.y2) / 2.0


@dataclass(frozen=True)
class Riser:
    """Positions of a riser-style one-line: sources on top, each level one band lower."""

    boxes: list[RiserBox]
    links: list[RiserLink]
    width: float
    height: float
    box_w: float = 150.0
    box_h: float = 58.0


def riser_layout(
    nodes: list[TreeNode], *, box_w: float = 150.0, box_h: float = 58.0, gap_x: float = 18.0, gap_y: float = 46.0
) -> Riser:
    """Leaves take successive columns; a parent sits centred over its children (tidy-tree layout)."""
    by_tag = {n.badge.tag: n for n in nodes}
    xs: dict[str, float] = {}
    next_col = [0]

    def place(tag: str) -> float:
        node = by_tag[tag]
        kids = [c for c in node.children if c in by_tag]
        if not kids:
            x = next_col[0] * (box_w + gap_x)
            next_col[0] += 1
        else:
            child_x = [place(c) for c in kids]
            x = (child_x[0] + child_x[-1]) / 2.0
        xs[tag] = x
        return x

    for n in nodes:
        if n.parent is None:
            place(n.badge.tag)
    pad = 10.0
    boxes = [RiserBox(n, xs.get(n.badge.tag, 0.0) + pad, n.depth * (box_h + gap_y) + pad) for n in nodes]
    pos = {b.node.badge.tag: b for b in boxes}
    links = []
    for b in boxes:
        if b.node.parent and b.node.parent in pos:
            p = pos[b.node.parent]
            links.append(RiserLink(p.x + box_w / 2, p.y + box_h, b.x + box_w / 2, b.y))
    width = max((b.x for b in boxes), default=0.0) + box_w + pad
    height = max((b.y for b in boxes), default=0.0) + box_h + pad
    return Riser(boxes, links, width, height, box_w, box_h)


@dataclass(frozen=True)
class TreeContext:
    """The distribution of a project: indented tree, riser diagram and the add/move/delete forms."""

    page: Page
    nodes: list[TreeNode]
    riser: Riser
    feeders: list[str]  # tags that can feed something (sources, transformers, panels)
    values: dict[str, str] = field(default_factory=dict)
    errors: dict[str, str] = field(default_factory=dict)
    form: str = ""  # which form the values/errors belong to ("add" or "move:<tag>")
    choices: Choices = CHOICES


@dataclass(frozen=True)
class DeleteContext:
    """Confirming the deletion of an element that feeds others."""

    page: Page
    node: Badge
    children: list[Badge]
    downstream: list[str]
    candidates: list[str]  # elements that could feed the children instead
    errors: dict[str, str] = field(default_factory=dict)


# --------------------------------------------------------------------------- warnings


@dataclass(frozen=True)
class WarningLine:
    warning: CalcWarning
    url: str
    kind: str


@dataclass(frozen=True)
class WarningsContext:
    """Every warning of the project, most severe first, each linking to its panel and slot."""

    page: Page
    lines: list[WarningLine]
    counts: dict[str, int]


def warning_lines(snap: Snapshot) -> list[WarningLine]:
    out = []
    for w in all_warnings(snap.result):
        if snap.model.panel(w.tag) is not None:
            out.append(WarningLine(w, URLS.slot(snap.project_id, w.tag, w.slot), "panel"))
        elif snap.model.transformer(w.tag) is not None:
            out.append(WarningLine(w, URLS.transformer(snap.project_id, w.tag), "transformer"))
        else:
            out.append(WarningLine(w, URLS.node(snap.project_id, w.tag, "source"), "source"))
    return out


def severity_counts(lines: list[WarningLine]) -> dict[str, int]:
    counts = {s.value: 0 for s in Severity}
    for line in lines:
        counts[line.warning.severity.value] += 1
    return counts
