"""What-if: preview one added load ("X kVA of category C, P poles, on this panel") without saving it.

Pure (standard library only).  :func:`preview` places the new circuit, recomputes the project
with the engine and returns the new totals and warnings of the panel and of every ancestor,
before and after.  Nothing is written: applying the change is an ordinary circuit edit through
the service layer (same validation as the panel editor).

**Best slot.**  Every free position that can take a breaker of P poles is a candidate: the
first slot empty (or holding only a "space" entry, which the breaker replaces), the other
slots of the breaker (s, s+2, s+4: same side, successive rows) empty and within the panel,
and the circuit accepted by :func:`server.calc.projectfile.check_circuit_fits` (no 1-pole load
on a 3-wire delta or on the high leg, no more poles than the system has lines).  Candidates are
ranked by the panel's resulting largest phase load (trade-convention VA, S/P on each pole),
then by its resulting imbalance (:func:`server.calc.loads.imbalance_pct`), then by slot
number; the first is proposed.

**Breaker.**  NEC 240.6(A) standard rating at or above the load current, × 125 % when the
load is continuous (NEC 210.20(A)), never below 15 A.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace

from .engine import compute_project
from .errors import Problem, ProjectFileError, SizingError
from .feeders import standard_ocpd_at_least
from .loads import imbalance_pct, load_amps, phase_shares
from .model import Category, Circuit, Panel, Project, Status
from .projectfile import check_circuit_fits, check_panel, replace_panel
from .results import CalcWarning, ProjectResult
from .systems import SYSTEMS, breaker_slots

CONTINUOUS_FACTOR = 1.25  # NEC 210.20(A)
MIN_BREAKER_AMPS = 15  # smallest branch-circuit breaker in common use (common practice)


@dataclass(frozen=True)
class AddedLoad:
    """What the engineer asks about: a load on a panel, optionally at a chosen slot."""

    tag: str
    load_va: float
    category: Category
    poles: int
    pf: float | None = None
    continuous: bool | None = None
    description: str = ""
    slot: int | None = None  # None = the best free slot


@dataclass(frozen=True)
class SlotOption:
    """One free position for the new breaker and what it does to the panel's phases."""

    slot: int
    phases: tuple[str, ...]
    phase_va: dict[str, float]  # the panel's connected VA per phase with the new load there
    max_phase_va: float
    imbalance_pct: float
    replaces_space: bool


@dataclass(frozen=True)
class NodeChange:
    """One node (the panel, then each ancestor up to the source): before and after."""

    tag: str
    kind: str  # "panel", "transformer" or "source"
    connected_va_before: float
    connected_va_after: float
    demand_va_before: float
    demand_va_after: float
    design_amps_before: float | None  # panels and sources
    design_amps_after: float | None
    pct_before: float | None  # panel: % of bus/main; transformer: loading %
    pct_after: float | None
    new_warnings: tuple[CalcWarning, ...]
    cleared_warnings: tuple[CalcWarning, ...]


@dataclass(frozen=True)
class WhatIfPreview:
    request: AddedLoad
    circuit: Circuit  # the circuit that would be added (slot chosen)
    option: SlotOption
    options: tuple[SlotOption, ...]  # every candidate, best first
    changes: tuple[NodeChange, ...]  # the panel first, then its ancestors
    project_after: Project
    result_after: ProjectResult


def new_circuit(req: AddedLoad, slot: int, system: str) -> Circuit:
    """The circuit of ``req`` at ``slot``, with its breaker sized (see the module docstring)."""
    spec = SYSTEMS[system]
    base = Circuit(
        slot=slot,
        poles=req.poles,
        description=req.description or f"Added {req.load_va / 1000:g} kVA {req.category.value}",
        category=req.category,
        va=req.load_va,
        pf=req.pf,
        continuous=req.continuous,
        status=Status.NEW,
    )
    amps = load_amps(spec, req.poles, req.load_va) if req.poles > 0 else 0.0
    need = amps * (CONTINUOUS_FACTOR if base.effective_continuous else 1.0)
    try:
        breaker = max(standard_ocpd_at_least(need), MIN_BREAKER_AMPS)
    except SizingError:
        breaker = None
    return replace(base, breaker_amps=breaker)


def slot_options(panel: Panel, phase_va: Mapping[str, float], req: AddedLoad) -> list[SlotOption]:
    """Every position that can take the new breaker, best first (see the module docstring)."""
    spec = SYSTEMS[panel.system]
    entries = {c.slot: c for c in panel.circuits}
    covered: set[int] = set()
    for c in panel.circuits:
        covered.update(breaker_slots(c.slot, c.poles) if c.poles > 0 else (c.slot,))
    out: list[SlotOption] = []
    for s in range(1, panel.spaces + 1):
        need = breaker_slots(s, req.poles)
        if need[-1] > panel.spaces:
            continue
        first = entries.get(s)
        replaces_space = first is not None and first.poles == 0
        if first is not None and not replaces_space:
            continue
        if any(x in covered for x in need[1:]) or (s in covered and not replaces_space):
            continue
        problems: list[Problem] = []
        check_circuit_fits(panel, replace(new_circuit(req, s, panel.system), slot=s), problems)
        if problems:
            continue
        after = dict(phase_va)
        for p, share in phase_shares(spec, s, req.poles):
            after[p] = after.get(p, 0.0) + req.load_va * share
        top = max(after.values(), default=0.0)
        out.append(
            SlotOption(
                s,
                tuple(p for p, _ in phase_shares(spec, s, req.poles)),
                after,
                top,
                imbalance_pct(after),
                replaces_space,
            )
        )
    # Round to 1 mVA so equal loads on different phases tie and the lower slot wins.
    out.sort(key=lambda o: (round(o.max_phase_va, 3), round(o.imbalance_pct, 6), o.slot))
    return out


def _node_kind(project: Project, tag: str) -> str:
    if project.panel(tag) is not None:
        return "panel"
    if project.transformer(tag) is not None:
        return "transformer"
    return "source"


def _figures(result: ProjectResult, tag: str) -> tuple[float, float, float | None, float | None]:
    if (p := result.panels.get(tag)) is not None:
        return p.connected_va_total, p.demand_va, p.design_amps, p.capacity_pct
    if (t := result.transformers.get(tag)) is not None:
        return t.connected_kva * 1000.0, t.load_kva * 1000.0, None, t.loading_pct
    s = result.sources[tag]
    return s.connected_va, s.demand_va, s.design_amps, None


def _warnings(result: ProjectResult, tag: str) -> tuple[CalcWarning, ...]:
    if (p := result.panels.get(tag)) is not None:
        return p.warnings
    if (t := result.transformers.get(tag)) is not None:
        return t.warnings
    return tuple(w for w in result.warnings if w.tag == tag)


def _key(w: CalcWarning) -> tuple:
    return (w.code, w.tag, w.slot)


def preview(
    project: Project,
    result: ProjectResult,
    req: AddedLoad,
    *,
    include_future: bool | None = None,
    existing_load_override_va: Mapping[str, float] | None = None,
) -> WhatIfPreview:
    """Place ``req`` on its panel and recompute; raises ProjectFileError naming what is wrong."""
    panel = project.panel(req.tag)
    if panel is None:
        raise ProjectFileError([Problem("is not a panel of this project", req.tag)])
    problems: list[Problem] = []
    if not req.load_va > 0:
        problems.append(Problem("must be more than 0", req.tag, field="kva"))
    if req.poles < 1:
        problems.append(Problem("a new load needs a breaker of 1 to 3 poles", req.tag, field="poles"))
    if req.pf is not None and not 0.0 < req.pf <= 1.0:
        problems.append(Problem("must be more than 0 and at most 1", req.tag, field="pf"))
    if problems:
        raise ProjectFileError(problems)
    before = result.panels[req.tag]
    options = slot_options(panel, before.connected_va, req)
    if req.slot is not None:
        chosen = [o for o in options if o.slot == req.slot]
        if not chosen:
            raise ProjectFileError(
                [
                    Problem(
                        f"slot {req.slot} cannot take a {req.poles}-pole breaker (taken, beyond the "
                        f"{panel.spaces} spaces, or not allowed on {panel.system})",
                        req.tag,
                        req.slot,
                        "slot",
                    )
                ]
            )
        option = chosen[0]
    elif options:
        option = options[0]
    else:
        raise ProjectFileError(
            [Problem(f"no free run of {req.poles} slot(s) for a {req.poles}-pole breaker", req.tag, field="spaces")]
        )
    circuit = new_circuit(req, option.slot, panel.system)
    kept = tuple(c for c in panel.circuits if c.slot != option.slot)
    new_panel = replace(panel, circuits=tuple(sorted((*kept, circuit), key=lambda c: c.slot)))
    check_panel(new_panel, problems)
    if problems:
        raise ProjectFileError(problems)
    project_after = replace_panel(project, new_panel)
    after = compute_project(
        project_after, include_future=include_future, existing_load_override_va=existing_load_override_va
    )
    changes = []
    for tag in (req.tag, *before.ancestors):
        c0, d0, a0, p0 = _figures(result, tag)
        c1, d1, a1, p1 = _figures(after, tag)
        w0 = {_key(w): w for w in _warnings(result, tag)}
        w1 = {_key(w): w for w in _warnings(after, tag)}
        changes.append(
            NodeChange(
                tag,
                _node_kind(project, tag),
                c0,
                c1,
                d0,
                d1,
                a0,
                a1,
                p0,
                p1,
                tuple(w for k, w in w1.items() if k not in w0),
                tuple(w for k, w in w0.items() if k not in w1),
            )
        )
    return WhatIfPreview(req, circuit, option, tuple(options), tuple(changes), project_after, after)
