"""Headroom: the spare capacity of every panel and transformer, and which limit binds first.

Pure function over a :class:`~server.calc.model.Project` and its
:class:`~server.calc.results.ProjectResult` (standard library only).  For each node the spare
capacity is given per phase, in amps on the node's own system and in kVA, as the smallest of
these checks (each named by :class:`Limit`):

* **bus**, **main** (panels): rating − design current of the phase.  The design current of a
  phase is its line current scaled like the engine's design current,
  I_design,p = I_line,p × design_amps / max(I_line) (NEC 215.2(A)(1): 125 % of continuous plus
  the rest, after Article 220 demand).
* **feeder conductor** and **feeder OCPD**: the feeder's ampacity (after correction, adjustment
  and terminal limits, all sets) or its overcurrent device − the same design current.  For a
  transformer these are its primary conductors and device, on the primary current scaled by
  demand (load kVA ÷ connected kVA).
* **transformer kVA**: full-load secondary current − secondary line current × demand ratio.
* **voltage drop**: the added load that would bring the cumulative drop to the project's total
  limit (or the node's own feeder drop to the feeder limit; NEC 215.2(A)(2) Informational Note
  No. 2 recommendation, 3 % / 5 %).  A feeder's drop is proportional to its load, so each
  feeder on the path from the source adds vd_f ÷ demand VA_f per VA added; a feeder that
  carries no load yet uses its conductor impedance (Chapter 9 Table 9) at pf 0.9.
* **upstream**: every ancestor's headroom limits its children.  Phases map one to one (trade
  convention: a load of S VA on n poles puts S/n on each pole); a child fed through some of
  the parent's phases takes the smallest of them.  Added load is counted at 100 % upstream
  (no demand factor: conservative).
* **spaces**: with no free slot and no spare breaker left, a new circuit cannot be added at all:
  the headroom is 0 and the limit is "spaces" (0 poles available).

Per-phase kVA = amps × the phase voltage of a balanced load on the system (V_LL/√3 three-phase,
V_LL/2 split-phase, V_LN single-phase: the engine's ``load_amps``).  Negative spare capacity
(an overload) is reported as 0 with the overloaded limit binding.  Sources carry no rating in
the project file: their headroom is unlimited (:attr:`Limit.NONE`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import StrEnum

from .loads import load_amps
from .model import Category, Circuit, Panel, Project, Status, Transformer
from .results import FeederResult, PanelResult, ProjectResult, TransformerResult
from .systems import SYSTEMS, SystemSpec, breaker_phases
from .voltage_drop import voltage_drop_pct

#: Power factor assumed for the drop of a feeder that carries no load yet (common practice).
EMPTY_FEEDER_PF = 0.9


class Limit(StrEnum):
    """What limits the spare capacity of a node."""

    BUS = "bus"
    MAIN = "main"
    FEEDER = "feeder conductor"
    OCPD = "feeder OCPD"
    TRANSFORMER = "transformer kVA"
    VOLTAGE_DROP = "voltage drop"
    UPSTREAM = "upstream"
    SPACES = "spaces"
    NONE = "no rating"


@dataclass(frozen=True)
class LimitCheck:
    """One check of a node: spare amps per phase (on the node's system) and how much is used."""

    limit: Limit
    amps: dict[str, float]  # may be negative (overloaded)
    used_pct: float  # load as % of this limit (drop as % of the allowed drop; slots used as %)
    detail: str
    tag: str  # the node whose rating this is (an ancestor for "upstream")

    @property
    def min_amps(self) -> float:
        return min(self.amps.values()) if self.amps else math.inf


@dataclass(frozen=True)
class Headroom:
    """Spare capacity of one node, limited by whichever check binds first."""

    tag: str
    kind: str  # "panel", "transformer" or "source"
    system: str
    amps: dict[str, float]  # per phase, ≥ 0 (inf for a source)
    kva: dict[str, float]  # per phase, ≥ 0
    binding: Limit
    binding_tag: str  # the node whose limit binds (itself, or an ancestor)
    binding_detail: str
    poles_available: int | None  # free slots + spare breaker poles (panels only)
    checks: tuple[LimitCheck, ...]
    used_pct: float  # the highest use of any of the node's own checks (for "closest to its limit")

    @property
    def min_amps(self) -> float:
        return min(self.amps.values()) if self.amps else 0.0

    @property
    def balanced_kva(self) -> float:
        """kVA of a balanced load over all phases that fits: smallest phase × number of phases."""
        return min(self.kva.values()) * len(self.kva) if self.kva else 0.0


def phase_va_per_amp(spec: SystemSpec) -> float:
    """VA on one phase per amp of line current for a balanced load over every phase of ``spec``."""
    n = len(spec.phases)
    return 1.0 / (n * load_amps(spec, n, 1.0))


def spare_poles(panel: Panel, result: PanelResult | None) -> int:
    """Free slots (no breaker, or only a space entry) plus the poles of unloaded spare breakers."""
    used = result.spaces_used if result is not None else sum(c.poles for c in panel.circuits)
    spare = sum(
        c.poles
        for c in panel.circuits
        if c.poles > 0
        and c.feeds is None
        and c.category == Category.SPARE
        and not (c.va or 0.0)
        and c.status != Status.REMOVED
    )
    return max(panel.spaces - used, 0) + spare


def _design_per_phase(line_amps: dict[str, float], design_amps: float) -> dict[str, float]:
    top = max(line_amps.values(), default=0.0)
    scale = design_amps / top if top > 0 else 0.0
    return {p: a * scale for p, a in line_amps.items()}


def _check(limit: Limit, rating: float, load: dict[str, float], tag: str, what: str) -> LimitCheck:
    amps = {p: rating - a for p, a in load.items()}
    top = max(load.values(), default=0.0)
    return LimitCheck(limit, amps, 100.0 * top / rating if rating > 0 else 0.0, f"{what} {rating:g} A", tag)


def _feeder_checks(feeder: FeederResult | None, load: dict[str, float], tag: str, to_node: float) -> list[LimitCheck]:
    """Ampacity and OCPD of a feeder; ``to_node`` converts feeder amps to amps on the node's system."""
    if feeder is None:
        return []
    out = []
    for limit, rating, what in (
        (Limit.FEEDER, feeder.ampacity_amps, f"{feeder.describe()}: ampacity"),
        (Limit.OCPD, float(feeder.ocpd_amps), "feeder overcurrent device"),
    ):
        c = _check(limit, rating, load, tag, what)
        out.append(LimitCheck(c.limit, {p: a * to_node for p, a in c.amps.items()}, c.used_pct, c.detail, tag))
    return out


@dataclass(frozen=True)
class _Path:
    """Voltage-drop bookkeeping of a node: its feeder and every feeder above it."""

    cum_pct: float
    own_pct: float
    own_sens: float  # own feeder: % drop per VA added
    sens: float  # whole path: % drop per VA added


def _sensitivity(feeder: FeederResult | None, demand_va: float, spec: SystemSpec) -> float:
    """Percent drop of one feeder per VA added downstream of it (balanced)."""
    if feeder is None or feeder.length_ft <= 0:
        return 0.0
    if demand_va > 0 and feeder.voltage_drop_pct > 0:
        return feeder.voltage_drop_pct / demand_va
    amps_per_va = load_amps(spec, len(spec.phases), 1.0)
    per_amp = voltage_drop_pct(
        current_a=1.0,
        length_ft=feeder.length_ft,
        size=feeder.conductor,
        material=feeder.material,
        conduit=feeder.conduit,
        sets=feeder.sets,
        pf=EMPTY_FEEDER_PF,
        system=spec,
    )
    return per_amp * amps_per_va


def compute_headroom(project: Project, result: ProjectResult) -> dict[str, Headroom]:
    """Headroom of every source, transformer and panel (see the module docstring), by tag."""
    info = project.project
    out: dict[str, Headroom] = {}
    paths: dict[str, _Path] = {}
    feeding = {c.feeds: (p, c) for p in project.panels for c in p.circuits if c.feeds is not None and c.poles > 0}

    nodes: list[tuple[int, str]] = []
    for tag, pr in result.panels.items():
        nodes.append((len(pr.ancestors), tag))
    for tag, tr in result.transformers.items():
        nodes.append((len(tr.ancestors), tag))
    for s in project.sources:
        spec = SYSTEMS[s.system]
        inf = dict.fromkeys(spec.phases, math.inf)
        out[s.tag] = Headroom(s.tag, "source", s.system, inf, inf, Limit.NONE, s.tag, "", None, (), 0.0)
        paths[s.tag] = _Path(0.0, 0.0, 0.0, 0.0)

    for _depth, tag in sorted(nodes):
        panel = project.panel(tag)
        if panel is not None:
            pr = result.panels[tag]
            out[tag] = _panel_headroom(project, panel, pr, out, paths, feeding, info.vd_total_pct, info.vd_feeder_pct)
            continue
        t = project.transformer(tag)
        tr = result.transformers.get(tag)
        if t is None or tr is None:
            continue
        out[tag] = _transformer_headroom(t, tr, out, paths, feeding, info.vd_total_pct, info.vd_feeder_pct)
    return out


def _upstream(
    tag: str,
    spec: SystemSpec,
    parent: str | None,
    out: dict[str, Headroom],
    feeding: dict[str, tuple[Panel, Circuit]],
) -> LimitCheck | None:
    """The parent's headroom seen from this node (phase for phase, or the least of the feeding phases)."""
    if parent is None or parent not in out:
        return None
    ph = out[parent]
    if ph.binding == Limit.NONE:
        return None
    via = feeding.get(tag)
    parent_phases: tuple[str, ...] = tuple(ph.kva)
    if via is not None:
        panel, circuit = via
        parent_phases = breaker_phases(SYSTEMS[panel.system], circuit.slot, circuit.poles)
    per_va = 1.0 / phase_va_per_amp(spec)
    same = set(spec.phases) == set(parent_phases) and len(parent_phases) == len(ph.kva)
    amps: dict[str, float] = {}
    for p in spec.phases:
        kva = ph.kva[p] if same and p in ph.kva else min(ph.kva[q] for q in parent_phases)
        amps[p] = kva * 1000.0 * per_va
    where = ph.binding_tag
    detail = f"{where}: {ph.binding.value}" + (f" ({ph.binding_detail})" if ph.binding_detail else "")
    return LimitCheck(Limit.UPSTREAM, amps, 0.0, detail, where)


def _vd_check(
    tag: str,
    spec: SystemSpec,
    feeder: FeederResult | None,
    demand_va: float,
    parent: str | None,
    paths: dict[str, _Path],
    total_limit: float,
    feeder_limit: float,
    own_spec: SystemSpec,
) -> LimitCheck | None:
    up = paths.get(parent or "", _Path(0.0, 0.0, 0.0, 0.0))
    own_sens = _sensitivity(feeder, demand_va, own_spec)
    own_pct = feeder.voltage_drop_pct if feeder is not None else 0.0
    cum = feeder.cumulative_voltage_drop_pct if feeder is not None else up.cum_pct
    path = _Path(cum, own_pct, own_sens, up.sens + own_sens)
    paths[tag] = path
    if path.sens <= 0:
        return None
    candidates = [
        ((total_limit - cum) / path.sens, 100.0 * cum / total_limit, f"{cum:.2f} % of {total_limit:g} % total")
    ]
    if own_sens > 0:
        candidates.append(
            (
                (feeder_limit - own_pct) / own_sens,
                100.0 * own_pct / feeder_limit,
                f"feeder {own_pct:.2f} % of {feeder_limit:g} %",
            )
        )
    va, used, detail = min(candidates, key=lambda c: c[0])
    n = len(spec.phases)
    amps_each = (va / n) / phase_va_per_amp(spec)
    return LimitCheck(Limit.VOLTAGE_DROP, dict.fromkeys(spec.phases, amps_each), used, detail, tag)


def _finish(
    tag: str,
    kind: str,
    system: str,
    spec: SystemSpec,
    checks: list[LimitCheck],
    poles: int | None,
) -> Headroom:
    own = [c for c in checks if c.limit != Limit.UPSTREAM]
    used = max((c.used_pct for c in own), default=0.0)
    if poles == 0:
        zero = dict.fromkeys(spec.phases, 0.0)
        spaces = LimitCheck(Limit.SPACES, zero, 100.0, "no free slot and no spare breaker: 0 poles available", tag)
        return Headroom(tag, kind, system, zero, zero, Limit.SPACES, tag, spaces.detail, 0, (*checks, spaces), 100.0)
    if not checks:
        inf = dict.fromkeys(spec.phases, math.inf)
        return Headroom(tag, kind, system, inf, inf, Limit.NONE, tag, "", poles, (), used)
    binding = min(checks, key=lambda c: c.min_amps)
    amps = {p: max(0.0, min(c.amps.get(p, math.inf) for c in checks)) for p in spec.phases}
    va_per_amp = phase_va_per_amp(spec)
    kva = {p: a * va_per_amp / 1000.0 for p, a in amps.items()}
    return Headroom(
        tag, kind, system, amps, kva, binding.limit, binding.tag, binding.detail, poles, tuple(checks), used
    )


def _panel_headroom(
    project: Project,
    panel: Panel,
    pr: PanelResult,
    out: dict[str, Headroom],
    paths: dict[str, _Path],
    feeding: dict[str, tuple[Panel, Circuit]],
    vd_total: float,
    vd_feeder: float,
) -> Headroom:
    spec = SYSTEMS[panel.system]
    tag = panel.tag
    load = _design_per_phase(pr.line_amps, pr.design_amps)
    checks = [_check(Limit.BUS, float(panel.bus_amps), load, tag, "bus")]
    if panel.main_amps is not None:
        checks.append(_check(Limit.MAIN, float(panel.main_amps), load, tag, "main breaker"))
    checks += _feeder_checks(pr.feeder, load, tag, 1.0)
    vd = _vd_check(tag, spec, pr.feeder, pr.demand_va, pr.fed_from, paths, vd_total, vd_feeder, spec)
    if vd is not None:
        checks.append(vd)
    up = _upstream(tag, spec, pr.fed_from, out, feeding)
    if up is not None:
        checks.append(up)
    poles = spare_poles(panel, pr)
    return _finish(tag, "panel", panel.system, spec, checks, poles)


def _transformer_headroom(
    t: Transformer,
    tr: TransformerResult,
    out: dict[str, Headroom],
    paths: dict[str, _Path],
    feeding: dict[str, tuple[Panel, Circuit]],
    vd_total: float,
    vd_feeder: float,
) -> Headroom:
    sec = SYSTEMS[t.secondary]
    pri = SYSTEMS[t.primary]
    tag = t.tag
    ratio = tr.load_kva / tr.connected_kva if tr.connected_kva > 0 else 1.0
    sec_load = {p: a * ratio for p, a in tr.secondary_line_amps.items()}
    checks = [_check(Limit.TRANSFORMER, tr.fla_secondary, sec_load, tag, f"{t.kva:g} kVA, secondary full-load")]
    checks[0] = LimitCheck(
        Limit.TRANSFORMER, checks[0].amps, 100.0 * tr.load_kva / t.kva, checks[0].detail, tag
    )  # the engine's loading % (kVA), the same figure as everywhere else
    if tr.feeder is not None and tr.primary_line_amps:
        pri_load_max = max(tr.primary_line_amps.values()) * ratio
        pri_load = dict.fromkeys(sec.phases, pri_load_max)
        # Primary amps → secondary amps carrying the same total VA (trade convention per pole).
        n_pri = len(tr.primary_line_amps)
        if n_pri == len(pri.phases) and pri.three_phase:
            pri_va_per_amp = phase_va_per_amp(pri)
        elif n_pri == 2:
            pri_va_per_amp = pri.v_ll / 2.0  # a winding across two lines: S/2 on each pole
        else:
            pri_va_per_amp = pri.v_ln or pri.v_ll
        to_sec = pri_va_per_amp * n_pri / len(sec.phases) / phase_va_per_amp(sec)
        checks += _feeder_checks(tr.feeder, pri_load, tag, to_sec)
    vd = _vd_check(tag, sec, tr.feeder, tr.load_kva * 1000.0, tr.fed_from, paths, vd_total, vd_feeder, pri)
    if vd is not None:
        checks.append(vd)
    up = _upstream(tag, sec, tr.fed_from, out, feeding)
    if up is not None:
        checks.append(up)
    return _finish(tag, "transformer", t.secondary, sec, checks, None)
