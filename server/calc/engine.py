"""The calculation engine: rolls a whole project up from circuits to sources.

Order of work (one tree per source; every element is fed exactly once, the project file
parser guarantees it):

1. **Own circuits** of each panel: per-phase connected VA (trade convention), phasor line
   currents of constant-power loads (:mod:`server.calc.loads`), third-harmonic currents,
   VA by load category, continuous VA, kitchen units, largest motor and cooling load.
2. **Bottom-up roll-up.**  A node's aggregate is its own circuits plus what each child
   presents to it.  A sub-panel maps phase for phase (A→A, B→B, C→C: a panelboard fed from a
   3-pole breaker is connected phase for phase, whichever row the breaker sits in) and its
   phasor line currents and third-harmonic neutral current add into the parent — unless its
   ``feeder_rotation`` r is not 0: then its phase index i lands on the parent's index
   (i + r) % 3 and its fundamental phasors turn by exp(−j·120°·r) (see :func:`_rotated`).  A
   transformer presents its primary line currents (:func:`~server.calc.loads.reflect_through_transformer`)
   and its secondary's connected VA by category, scaled by (1 + loss_pct/100) and spread
   evenly over the feeding breaker's poles (trade convention).  Demand
   (:func:`server.calc.demand.apply_demand`) is re-applied at every panel, transformer and
   source from the aggregate of its whole subtree, so the 10 kVA receptacle allowance, the
   kitchen unit count and the largest motor are taken once per node, never summed from the
   panels below.
3. **Local results** of each node: demand, design current, feeder, transformer sizing and
   the warnings that depend only on the node and its subtree.
4. **Top-down pass**: cumulative voltage drop (parent's cumulative + own feeder drop; a panel
   on a transformer secondary starts from the transformer primary feeder's cumulative) and
   bolted fault current from the source through every feeder and transformer.

Design current (A): design_amps = max over phases of line_amps × design_va / connected_va,
design_va = demand_va + 0.25 × continuous_demand_va (125 % of the continuous part, 100 % of
the rest, NEC 215.2(A)(1); the 25 % of the largest motor is already inside demand_va).  The
most-loaded phase sets the feeder.  0 when nothing is connected.

**Metered existing load (NEC 220.87).**  ``existing_load_override_va`` maps a node tag to an
existing load taken from metered data (maximum demand × 125 %, VA).  At that node the
aggregate leaves out every ``existing`` circuit of its whole subtree (the meter on its feeder
saw all of them) and adds the metered load instead: spread evenly over the node's phases as
one balanced load at :data:`METERED_PF`, in the demand category
:data:`server.calc.demand.METERED_EXISTING` at 100 %.  New and future loads stay on top with
their own demand factors.  Nodes below keep their schedules; nodes above see the metered
figure through it.  A metered node inside another metered node's subtree is covered by the
upper meter.

:class:`Calculator` keeps every node's aggregates so that :meth:`Calculator.update_panel`
recomputes one panel's circuits, re-aggregates its ancestors from cached child aggregates,
re-runs demand/feeder/transformer sizing for those nodes only and then runs the cheap
top-down pass; the result is identical to a full :func:`compute_project`.
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from . import demand as _demand
from . import faults as _faults
from . import feeders as _feeders
from . import tables as _tables
from . import transformers as _xf
from . import voltage_drop as _vd
from .errors import Problem, ProjectFileError, SizingError
from .loads import (
    current_coefficients,
    imbalance_pct,
    load_amps,
    neutral_current,
    orientation,
    phase_shares,
    reflect_through_transformer,
    reflect_triplens,
    triplen_rotation,
    triplens_pass,
    winding_connection,
)
from .model import (
    CONTINUOUS_BY_DEFAULT,
    DEFAULT_PF,
    DEFAULT_PF_OTHER,
    Category,
    Circuit,
    Panel,
    Project,
    Source,
    Status,
    Transformer,
)
from .projectfile import check_panel, check_topology, replace_panel
from .results import (
    CalcWarning,
    CircuitResult,
    FeederResult,
    PanelResult,
    ProjectResult,
    Severity,
    SourceResult,
    TransformerResult,
    WarningCode,
)
from .systems import SQRT3, SYSTEMS, SystemKind, SystemSpec, breaker_phases, breaker_slots

#: NEC 210.20(A) / 215.3: an overcurrent device carries 125 % of the continuous load plus
#: the noncontinuous load.
CONTINUOUS_FACTOR = 1.25
#: Common practice: the neutral of a 4-wire wye counts as current-carrying when the major
#: portion of the load is nonlinear (NEC 310.15(E)(3)); "major portion" = more than half.
HARMONIC_DOMINANT_SHARE = 0.5
#: The 120 V loads of a high-leg delta all land on the centre-tapped A–C winding; above this
#: share of the panel's connected VA a 208Y/120 system is usually the better choice.
HIGH_LEG_LN_SHARE = 0.5

#: Power factor given to a metered existing load (the meter's kVA carries no angle); common
#: practice for mixed building loads, the same as :data:`server.calc.metered.DEFAULT_PF`.
METERED_PF = 0.9

_SEVERITY_ORDER = (Severity.ERROR, Severity.WARNING, Severity.NOTE)
_SEVERITY_RANK = {sev: i for i, sev in enumerate(_SEVERITY_ORDER)}
_KITCHEN = Category.KITCHEN.value
_MOTOR = Category.MOTOR.value
_COOLING = Category.COOLING.value
_SPARE = Category.SPARE


def _evolve(obj, **changes):
    """A copy of a frozen result dataclass with ``changes`` applied.

    Same outcome as :func:`dataclasses.replace` for these plain result classes (no
    ``__post_init__``, no init-only fields), without re-running ``__init__``: the top-down
    pass re-issues many results after one edit, and this keeps it cheap.
    """
    new = object.__new__(type(obj))
    d = new.__dict__
    d.update(obj.__dict__)
    d.update(changes)
    return new


def sort_warnings(warnings: Iterable[CalcWarning]) -> tuple[CalcWarning, ...]:
    """Severity first (errors, warnings, notes), then tag, slot and code."""
    return tuple(
        sorted(
            warnings,
            key=lambda w: (_SEVERITY_RANK[w.severity], w.tag, -1 if w.slot is None else w.slot, w.code.value),
        )
    )


# --------------------------------------------------------------------------- aggregates


class _Agg:
    """Mutable running totals of a node (engine-internal; never leaves this module)."""

    __slots__ = (
        "phase_va",
        "by_cat",
        "cont_by_cat",
        "kitchen_units",
        "kitchen_top2",
        "largest_motor",
        "largest_cooling",
        "line_i",
        "line_i3",
        "neutral_i3",
        "p_w",
        "q_var",
        "h3_ln_va",
        "h3_va",
    )

    def __init__(self, phases: tuple[str, ...]) -> None:
        self.phase_va: dict[str, float] = dict.fromkeys(phases, 0.0)
        self.by_cat: dict[str, float] = {}
        self.cont_by_cat: dict[str, float] = {}
        self.kitchen_units = 0
        self.kitchen_top2 = (0.0, 0.0)
        self.largest_motor = 0.0
        self.largest_cooling = 0.0
        self.line_i: dict[str, complex] = dict.fromkeys(phases, 0j)
        self.line_i3: dict[str, float] = dict.fromkeys(phases, 0.0)
        self.neutral_i3 = 0j  # phasor sum of line-to-neutral third-harmonic currents
        self.p_w = 0.0
        self.q_var = 0.0
        self.h3_ln_va = 0.0  # VA of line-to-neutral loads with third-harmonic content
        self.h3_va = 0.0  # Σ VA × harmonic3_pct/100 (for the K-factor)

    def total_va(self) -> float:
        return sum(self.phase_va.values())

    def add_kitchen(self, va: float) -> None:
        self.kitchen_units += 1
        a, b = self.kitchen_top2
        if va > a:
            self.kitchen_top2 = (va, a)
        elif va > b:
            self.kitchen_top2 = (a, va)

    def merge_counts(self, other: _Agg, scale: float = 1.0) -> None:
        """Add the category totals and the single-largest figures of ``other``."""
        for k, v in other.by_cat.items():
            self.by_cat[k] = self.by_cat.get(k, 0.0) + v * scale
        for k, v in other.cont_by_cat.items():
            self.cont_by_cat[k] = self.cont_by_cat.get(k, 0.0) + v * scale
        self.kitchen_units += other.kitchen_units
        top = sorted((*self.kitchen_top2, *other.kitchen_top2), reverse=True)
        self.kitchen_top2 = (top[0], top[1])
        if other.largest_motor > self.largest_motor:
            self.largest_motor = other.largest_motor
        if other.largest_cooling > self.largest_cooling:
            self.largest_cooling = other.largest_cooling
        self.p_w += other.p_w * scale
        self.q_var += other.q_var * scale

    def add_same(self, other: _Agg) -> None:
        """Add a child on the same system, phase for phase."""
        self.merge_counts(other)
        for p, v in other.phase_va.items():
            self.phase_va[p] += v
        for p, i in other.line_i.items():
            self.line_i[p] += i
        for p, v in other.line_i3.items():
            self.line_i3[p] += v
        self.neutral_i3 += other.neutral_i3
        self.h3_ln_va += other.h3_ln_va
        self.h3_va += other.h3_va

    def pf(self) -> float:
        s = math.hypot(self.p_w, self.q_var)
        return self.p_w / s if s > 0 else 1.0

    def demand_input(self) -> _demand.DemandInput:
        return _demand.DemandInput(
            connected_by_category=dict(self.by_cat),
            continuous_by_category=dict(self.cont_by_cat),
            kitchen_units=self.kitchen_units,
            kitchen_two_largest_va=self.kitchen_top2,
            largest_motor_va=self.largest_motor,
            largest_cooling_va=self.largest_cooling,
        )


# --------------------------------------------------------------------------- nodes


@dataclass(frozen=True)
class _WindingSpec(SystemSpec):
    """The single-phase connection of a single-phase transformer's primary (e.g. 480 V line to
    line on a 480Y/277 system), used to size and check its primary feeder as a 2-wire circuit."""

    nominal: float = 0.0

    def nominal_v_ll(self) -> float:
        return self.nominal


def _winding_spec(volts_nominal: float, volts: float) -> _WindingSpec:
    return _WindingSpec(
        name=f"{volts_nominal:g} V single-phase winding",
        kind=SystemKind.SINGLE,
        v_ln=volts,
        v_ll=volts,
        phases=("A",),
        wires=2,
        nominal=volts_nominal,
    )


class _Node:
    """One source, transformer or panel of the tree, with its cached aggregates and results."""

    __slots__ = (
        "kind",
        "tag",
        "element",
        "spec",
        "parent",
        "children",
        "via",
        "primary",
        "primary_phases",
        "pole_phases",
        "v_pri_winding",
        "own",
        "own_circuits",
        "own_warnings",
        "spaces_used",
        "total",
        "up",
        "local",
        "z_bus",
        "cum_vd",
        "bus_changed",
        "final",
        "final_key",
        "final_by_severity",
        "final_warnings",
    )

    def __init__(self, kind: str, element: Source | Transformer | Panel, spec: SystemSpec) -> None:
        self.kind = kind
        self.tag = element.tag
        self.element = element
        self.spec = spec
        self.parent: _Node | None = None
        self.children: list[_Node] = []
        self.via: Circuit | None = None  # the feeding breaker on the parent panel
        self.primary: SystemSpec | None = None
        self.primary_phases: tuple[str, ...] = ()
        self.pole_phases: tuple[str, ...] = ()
        self.v_pri_winding = 0.0
        self.own: _Agg | None = None
        self.own_circuits: list[CircuitResult] = []
        self.own_warnings: list[CalcWarning] = []
        self.spaces_used = 0
        self.total: _Agg | None = None
        self.up: _Agg | None = None
        self.local: _Local | None = None
        self.z_bus = 0j
        self.cum_vd = 0.0
        self.bus_changed = True
        self.final: object | None = None
        self.final_key: tuple | None = None
        self.final_by_severity: tuple[tuple[CalcWarning, ...], ...] = ()
        self.final_warnings: tuple[CalcWarning, ...] | None = None


@dataclass(frozen=True)
class _Local:
    """What a node's subtree alone decides (before the top-down pass)."""

    result: PanelResult | TransformerResult | SourceResult
    feeder: FeederResult | None  # cumulative drop still = own drop
    warnings: tuple[CalcWarning, ...]  # sorted; excluding the top-down ones
    z_feeder: complex = 0j  # one-way impedance of one phase conductor run (ohms)


# --------------------------------------------------------------------------- own circuits


class _SlotInfo:
    """Everything about a breaker position that does not depend on its load (cached per system)."""

    __slots__ = ("slots", "phases", "shares", "coefs", "inv_v", "ln_phase", "ln_rot", "ln_coef")

    def __init__(self, spec: SystemSpec, slot: int, poles: int) -> None:
        self.slots = breaker_slots(slot, poles)
        self.shares = phase_shares(spec, slot, poles)
        self.phases = tuple(p for p, _ in self.shares)
        self.coefs = current_coefficients(spec, slot, poles)
        self.inv_v = load_amps(spec, poles, 1.0)  # amps per VA
        self.ln_phase = self.phases[0] if poles == 1 else None
        self.ln_rot = triplen_rotation(spec, self.ln_phase) if self.ln_phase is not None else 0j
        self.ln_coef = self.coefs[0][1] if poles == 1 else 0j


_SLOT_INFO: dict[str, dict[tuple[int, int], _SlotInfo]] = {}


def _slot_info(spec: SystemSpec) -> dict[tuple[int, int], _SlotInfo]:
    table = _SLOT_INFO.get(spec.name)
    if table is None:
        table = _SLOT_INFO[spec.name] = {}
    return table


#: CircuitResults are built without the frozen-dataclass ``__init__`` (one per circuit: 21 000
#: in a large project): ``_new(CircuitResult)`` then its ``__dict__`` filled with every field,
#: which gives an object identical to ``CircuitResult(...)``.
_new = object.__new__


_REMOVED = Status.REMOVED
_FUTURE = Status.FUTURE
_CONTINUOUS_DEFAULT = frozenset(c.value for c in CONTINUOUS_BY_DEFAULT)
_DEFAULT_PF = {c.value: pf for c, pf in DEFAULT_PF.items()}
_SIN_PHI: dict[float, float] = {}  # sin φ by power factor (few distinct values in a project)


def _own_circuits(node: _Node, include_future: bool, code_label: str) -> None:
    """Step 1 for a panel: its own (non-feeding) circuits.

    Same arithmetic as :func:`server.calc.loads.circuit_currents` and friends, with the
    per-slot phasor coefficients looked up once per (system, slot, poles).
    """
    panel: Panel = node.element  # type: ignore[assignment]
    spec = node.spec
    info = _slot_info(spec)
    agg = _Agg(spec.phases)
    results: list[CircuitResult] = []
    warnings: list[CalcWarning] = []
    used = 0
    spare_breakers = 0
    phase_va = agg.phase_va
    line_i = agg.line_i
    line_i3 = agg.line_i3
    by_cat = agg.by_cat
    cont_by_cat = agg.cont_by_cat
    p_w = q_var = h3_va = h3_ln_va = 0.0
    n3 = 0j
    for c in panel.circuits:
        poles = c.poles
        if poles == 0:
            continue
        used += poles
        if c.feeds is not None:
            continue
        slot = c.slot
        si = info.get((slot, poles))
        if si is None:
            si = info[(slot, poles)] = _SlotInfo(spec, slot, poles)
        cat = c.category
        catv = "equipment" if cat is None else cat._value_  # the plain attribute behind .value
        if catv == "spare":
            spare_breakers += 1
        va = c.va or 0.0
        amps = va * si.inv_v
        status = c.status
        counted = status is not _REMOVED and (include_future or status is not _FUTURE)
        r = _new(CircuitResult)
        r.__dict__.update(
            slot=slot,
            slots=si.slots,
            phases=si.phases,
            phase_va={si.ln_phase: va} if poles == 1 else {p: va * s for p, s in si.shares},
            amps=amps,
            counted=counted,
            load_va=va,
        )
        results.append(r)
        cont = c.continuous
        if cont is None:
            cont = catv in _CONTINUOUS_DEFAULT
        if c.breaker_amps is not None and va > 0 and status is not _REMOVED:
            need = amps * (CONTINUOUS_FACTOR if cont else 1.0)
            if c.breaker_amps < need - 1e-9:
                what = "125 % of its continuous load" if cont else "its load"
                warnings.append(
                    CalcWarning(
                        WarningCode.BREAKER_UNDERSIZED,
                        f"{panel.tag} slot {slot}: {c.breaker_amps} A breaker is below {what} "
                        f"({need:.1f} A) ({code_label} 210.20(A))",
                        panel.tag,
                        slot,
                        Severity.ERROR,
                    )
                )
        if not counted or va <= 0.0:
            continue
        by_cat[catv] = by_cat.get(catv, 0.0) + va
        if cont:
            cont_by_cat[catv] = cont_by_cat.get(catv, 0.0) + va
        if catv == _KITCHEN:
            agg.add_kitchen(va)
        elif catv == _MOTOR:
            if va > agg.largest_motor:
                agg.largest_motor = va
        elif catv == _COOLING and va > agg.largest_cooling:
            agg.largest_cooling = va
        pf = c.pf
        if pf is None:
            pf = _DEFAULT_PF.get(catv, DEFAULT_PF_OTHER)
        # conj(S) = VA · (pf − j·sin φ), lagging (server.calc.loads.conj_power)
        sin_phi = _SIN_PHI.get(pf)
        if sin_phi is None:
            if len(_SIN_PHI) > 4096:  # typed power factors are few; never let the memo grow unbounded
                _SIN_PHI.clear()
            sin_phi = _SIN_PHI[pf] = math.sqrt(max(0.0, 1.0 - pf * pf))
        q = va * sin_phi
        s_conj = complex(va * pf, -q)
        p_w += va * pf
        q_var += q
        if poles == 1:  # the common case, without the loops
            p = si.ln_phase
            phase_va[p] += va
            line_i[p] += s_conj * si.ln_coef
        else:
            for p, s in si.shares:
                phase_va[p] += va * s
            for p, k in si.coefs:
                line_i[p] += s_conj * k
        h3 = c.harmonic3_pct
        if h3 > 0.0:
            i3 = amps * h3 / 100.0
            h3_va += va * h3 / 100.0
            if poles == 1:
                p = si.ln_phase
                line_i3[p] += i3
                n3 += i3 * si.ln_rot
                h3_ln_va += va
            elif poles == 2:
                # Line-to-line: the triplen current flows out one line and back the other.
                for p in si.phases:
                    line_i3[p] += i3
            # 3-pole: balanced triplens are zero sequence with no return path in a 3-wire load.
    agg.p_w = p_w
    agg.q_var = q_var
    agg.h3_va = h3_va
    agg.h3_ln_va = h3_ln_va
    agg.neutral_i3 = n3
    free = panel.spaces - used
    if free <= 0 and spare_breakers == 0:
        warnings.append(
            CalcWarning(
                WarningCode.SPACES_EXHAUSTED,
                f"{panel.tag}: all {panel.spaces} spaces are used and no spare breaker is left",
                panel.tag,
                None,
                Severity.NOTE,
            )
        )
    node.own = agg
    node.own_circuits = results
    node.own_warnings = warnings
    node.spaces_used = used


# --------------------------------------------------------------------------- the engine


class Calculator:
    """Full and incremental calculation of one project (see the module docstring)."""

    def __init__(
        self,
        project: Project,
        *,
        include_future: bool | None = None,
        existing_load_override_va: Mapping[str, float] | None = None,
    ) -> None:
        self._include_future_opt = include_future
        #: node tag → metered existing load (VA) replacing its subtree's existing circuits
        self.existing_load_override_va: dict[str, float] = dict(existing_load_override_va or {})
        self._build(project)

    # ---- construction

    def _build(self, project: Project) -> None:
        self.project = project
        info = project.project
        self.include_future = info.include_future if self._include_future_opt is None else self._include_future_opt
        self.code = info.code
        self.nodes: dict[str, _Node] = {}
        self.roots: list[_Node] = []
        for s in project.sources:
            self.nodes[s.tag] = _Node("source", s, SYSTEMS[s.system])
        for t in project.transformers:
            n = _Node("transformer", t, SYSTEMS[t.secondary])
            n.primary = SYSTEMS[t.primary]
            self.nodes[t.tag] = n
        for p in project.panels:
            self.nodes[p.tag] = _Node("panel", p, SYSTEMS[p.system])
        fed_by: dict[str, tuple[str, Circuit]] = {}
        for p in project.panels:
            for c in p.circuits:
                if c.feeds is not None and c.poles > 0:
                    fed_by[c.feeds] = (p.tag, c)
        for element in (*project.transformers, *project.panels):
            node = self.nodes[element.tag]
            via = fed_by.get(element.tag)
            if via is not None:
                parent = self.nodes[via[0]]
                node.via = via[1]
            elif element.fed_from is not None and element.fed_from in self.nodes:
                parent = self.nodes[element.fed_from]
            else:
                raise ProjectFileError([Problem("is not fed from anything", element.tag, field="fed_from")])
            node.parent = parent
            parent.children.append(node)
        for s in project.sources:
            self.roots.append(self.nodes[s.tag])
        self.order: list[_Node] = []  # parents before children
        stack = list(reversed(self.roots))
        while stack:
            n = stack.pop()
            self.order.append(n)
            stack.extend(reversed(n.children))
        if len(self.order) != len(self.nodes):
            missing = sorted(set(self.nodes) - {n.tag for n in self.order})
            raise ProjectFileError([Problem("is not connected to any source (feed loop?)", t) for t in missing])
        self.by_tag = sorted(self.order, key=lambda n: n.tag)
        self._vd_note = _tables.section("feeder_vd_note", self.code)
        self._warnings_dirty = True
        self._warned: list[_Node] | None = None  # by_tag nodes that have warnings; None: to be listed
        self._all_warnings: tuple[CalcWarning, ...] = ()
        self._result: ProjectResult | None = None  # None: the next _assemble builds every entry
        self._reissued: list[_Node] = []  # nodes whose final result _top_down replaced since _assemble
        for n in self.order:
            if n.kind == "transformer":
                self._wire_transformer(n)
        code_label = self.code.value
        for n in self.order:
            if n.kind == "panel":
                _own_circuits(n, self.include_future, code_label)
        for n in reversed(self.order):
            self._aggregate(n)
            self._local(n)
        self._top_down()
        self._assemble()

    def _wire_transformer(self, node: _Node) -> None:
        parent = node.parent
        assert parent is not None and node.primary is not None
        sec = node.spec
        if sec.three_phase:
            node.primary_phases = parent.spec.phases
            node.pole_phases = (
                breaker_phases(parent.spec, node.via.slot, node.via.poles) if node.via else parent.spec.phases
            )
            node.v_pri_winding = node.primary.nominal_v_ll()
            return
        if node.via is not None:
            phases = breaker_phases(parent.spec, node.via.slot, node.via.poles)
        else:
            phases = parent.spec.phases[:2]
        node.primary_phases = phases
        node.pole_phases = phases
        # A single-phase winding sits across the feeding system's lines (or line and neutral):
        # its phasors, not the primary string (which only states the voltage), place it.
        node.primary = parent.spec
        if len(phases) >= 2:
            node.v_pri_winding = parent.spec.nominal_v_ll()
        else:
            node.v_pri_winding = parent.spec.v_ln or parent.spec.nominal_v_ll()

    # ---- step 2: roll-up

    def _aggregate(self, node: _Node) -> None:
        metered = self.existing_load_override_va.get(node.tag) if self.existing_load_override_va else None
        if metered is not None:
            agg = self._without_existing(node)
            _add_metered(agg, node.spec, metered)
        else:
            agg = _Agg(node.spec.phases)
            if node.own is not None:
                agg.add_same(node.own)
            for child in node.children:
                if child.via is not None and not child.via.counts(self.include_future):
                    continue
                assert child.up is not None
                agg.add_same(child.up)
        node.total = agg
        node.up = self._present_to_parent(node) if node.parent is not None else None

    def _without_existing(self, node: _Node) -> _Agg:
        """The aggregate of ``node``'s subtree with every ``existing`` circuit left out."""
        agg = _Agg(node.spec.phases)
        if node.kind == "panel":
            panel: Panel = node.element  # type: ignore[assignment]
            keep = tuple(c for c in panel.circuits if c.status is not Status.EXISTING or c.feeds is not None)
            tmp = _Node("panel", Panel(panel.tag, panel.system, circuits=keep, spaces=panel.spaces), node.spec)
            _own_circuits(tmp, self.include_future, self.code.value)
            assert tmp.own is not None
            agg.add_same(tmp.own)
        for child in node.children:
            if child.via is not None and not child.via.counts(self.include_future):
                continue
            agg.add_same(self._present_to_parent(child, self._without_existing(child)))
        return agg

    def _present_to_parent(self, node: _Node, total: _Agg | None = None) -> _Agg:
        total = node.total if total is None else total
        assert total is not None
        if node.kind == "panel":
            rotation = node.element.feeder_rotation  # type: ignore[union-attr]
            if rotation:
                return _rotated(total, rotation)
            return total  # same system, phase for phase
        t: Transformer = node.element  # type: ignore[assignment]
        parent_spec = node.parent.spec  # type: ignore[union-attr]
        pri = node.primary
        assert pri is not None
        k = 1.0 + t.loss_pct / 100.0
        up = _Agg(parent_spec.phases)
        up.merge_counts(total, k)
        share = total.total_va() * k / len(node.pole_phases)
        for p in node.pole_phases:
            up.phase_va[p] += share
        rot = orientation(parent_spec) * orientation(pri).conjugate()
        for p, i in reflect_through_transformer(node.spec, pri, total.line_i, node.primary_phases).items():
            up.line_i[p] += i * k * rot
        i3, n3 = reflect_triplens(node.spec, pri, total.line_i3, total.neutral_i3, node.primary_phases)
        for p, v in i3.items():
            up.line_i3[p] += v * k
        up.neutral_i3 = n3 * k * rot**3
        if triplens_pass(node.spec, pri):
            up.h3_va = total.h3_va * k
            if _primary_neutral(node):
                up.h3_ln_va = total.h3_ln_va * k
        return up

    # ---- step 3: local results

    def _demand(self, agg: _Agg) -> _demand.DemandResult:
        return _demand.apply_demand(agg.demand_input(), code=self.code, occupancy=self.project.project.occupancy)

    def _currents(self, spec: SystemSpec, agg: _Agg, dem: _demand.DemandResult):
        total_va = agg.total_va()
        line_amps = {p: abs(i) for p, i in agg.line_i.items()}
        line_rms = {p: math.hypot(line_amps[p], agg.line_i3.get(p, 0.0)) for p in line_amps}
        neutral = neutral_current(sum(agg.line_i.values(), 0j), agg.neutral_i3) if spec.has_neutral else None
        max_amps = max(line_amps.values()) if line_amps else 0.0
        design_va = dem.demand_va + 0.25 * dem.continuous_demand_va
        if total_va > 0.0:
            design_amps = max_amps * design_va / total_va
            demand_amps = max_amps * dem.demand_va / total_va
        else:
            design_amps = demand_amps = 0.0
        return total_va, line_amps, line_rms, neutral, design_amps, demand_amps

    def _feeder(
        self,
        *,
        tag: str,
        feeder,
        system: SystemSpec,
        design_amps: float,
        load_amps: float,
        pf: float,
        neutral_amps: float | None,
        harmonic_dominant: bool,
        breaker_amps: int | None,
        has_neutral: bool | None = None,
    ) -> tuple[FeederResult | None, list[CalcWarning]]:
        info = self.project.project
        try:
            fd = _feeders.design_feeder(
                tag=tag,
                feeder=feeder,
                system=system,
                design_amps=design_amps,
                load_amps=load_amps,
                pf=pf,
                neutral_amps=neutral_amps,
                harmonic_dominant=harmonic_dominant,
                breaker_amps=breaker_amps,
                vd_limit_pct=info.vd_feeder_pct,
                upstream_vd_pct=0.0,
                vd_total_limit_pct=info.vd_total_pct,
                code=self.code,
                has_neutral=has_neutral,
            )
        except SizingError as exc:
            return None, [CalcWarning(WarningCode.NO_SIZE, f"{tag} feeder: {exc}", tag, None, Severity.ERROR)]
        # The total drop depends on everything upstream: the top-down pass decides it.  Every
        # message names the element, as the engine's own warnings do.
        warnings = [
            w if w.message.startswith(tag) else _evolve(w, message=f"{tag} feeder: {w.message}")
            for w in fd.warnings
            if w.code != WarningCode.VOLTAGE_DROP_TOTAL
        ]
        result = fd.result
        if result.ampacity_amps + 1e-9 < design_amps and not any(
            w.code == WarningCode.FEEDER_AMPACITY and w.severity != Severity.NOTE for w in warnings
        ):
            warnings.append(
                CalcWarning(
                    WarningCode.FEEDER_AMPACITY,
                    f"{tag} feeder: ampacity {result.ampacity_amps:.0f} A is below the design current "
                    f"{design_amps:.1f} A",
                    tag,
                    None,
                    Severity.ERROR,
                )
            )
        return result, warnings

    def _local(self, node: _Node) -> None:
        if node.kind == "panel":
            node.local = self._local_panel(node)
        elif node.kind == "transformer":
            node.local = self._local_transformer(node)
        else:
            node.local = self._local_source(node)

    def _local_panel(self, node: _Node) -> _Local:
        panel: Panel = node.element  # type: ignore[assignment]
        spec = node.spec
        agg = node.total
        assert agg is not None
        info = self.project.project
        dem = self._demand(agg)
        total_va, line_amps, line_rms, neutral, design_amps, demand_amps = self._currents(spec, agg, dem)
        harmonic_dominant = spec.kind == SystemKind.WYE and agg.h3_ln_va > HARMONIC_DOMINANT_SHARE * total_va > 0
        feeder, fwarn = self._feeder(
            tag=panel.tag,
            feeder=panel.feeder,
            system=spec,
            design_amps=design_amps,
            load_amps=demand_amps,
            pf=agg.pf(),
            neutral_amps=neutral,
            harmonic_dominant=harmonic_dominant,
            breaker_amps=node.via.breaker_amps if node.via is not None else None,
        )
        warnings = list(node.own_warnings) + fwarn
        tag = panel.tag
        if design_amps > panel.bus_amps + 1e-9:
            warnings.append(
                CalcWarning(
                    WarningCode.BUS_OVERLOAD,
                    f"{tag}: design current {design_amps:.1f} A exceeds the {panel.bus_amps} A bus",
                    tag,
                    None,
                    Severity.ERROR,
                )
            )
        if panel.main_amps is not None and design_amps > panel.main_amps + 1e-9:
            warnings.append(
                CalcWarning(
                    WarningCode.MAIN_OVERLOAD,
                    f"{tag}: design current {design_amps:.1f} A exceeds the {panel.main_amps} A main breaker",
                    tag,
                    None,
                    Severity.ERROR,
                )
            )
        imbalance = imbalance_pct(agg.phase_va)
        if imbalance > info.imbalance_limit_pct:
            phases = ", ".join(f"{p} {v:,.0f} VA" for p, v in agg.phase_va.items())
            warnings.append(
                CalcWarning(
                    WarningCode.IMBALANCE,
                    f"{tag}: phase imbalance {imbalance:.1f} % is over the project limit of "
                    f"{info.imbalance_limit_pct:g} % ({phases})",
                    tag,
                )
            )
        if (
            neutral is not None
            and feeder is not None
            and not any(w.code == WarningCode.NEUTRAL_OVERLOAD for w in warnings)
        ):
            n_amp = self._neutral_ampacity(feeder)
            if n_amp is not None and neutral > n_amp + 1e-9:
                warnings.append(
                    CalcWarning(
                        WarningCode.NEUTRAL_OVERLOAD,
                        f"{tag}: neutral current {neutral:.1f} A exceeds the ampacity of the "
                        f"{feeder.neutral} neutral ({n_amp:.0f} A)",
                        tag,
                        None,
                        Severity.ERROR,
                    )
                )
        if spec.kind == SystemKind.HIGH_LEG and node.own is not None:
            ln_va = sum(v for c, v in self._ln_va(panel))
            if total_va > 0 and ln_va > HIGH_LEG_LN_SHARE * total_va:
                warnings.append(
                    CalcWarning(
                        WarningCode.HIGH_LEG,
                        f"{tag}: {100 * ln_va / total_va:.0f} % of the connected load is 120 V line-to-neutral, "
                        "all of it on the centre-tapped A–C winding; check that winding's rating or use a "
                        "208Y/120 V system",
                        tag,
                    )
                )
        capacity = float(min(panel.bus_amps, panel.main_amps or panel.bus_amps))
        circuits = self._circuit_results(node)
        result = PanelResult(
            tag=tag,
            system=panel.system,
            connected_va=dict(agg.phase_va),
            connected_va_total=total_va,
            connected_by_category=dict(agg.by_cat),
            demand_va=dem.demand_va,
            demand_steps=dem.steps,
            continuous_demand_va=dem.continuous_demand_va,
            largest_motor_va=dem.largest_motor_va,
            line_amps=line_amps,
            line_amps_rms=line_rms,
            neutral_amps=neutral,
            imbalance_pct=imbalance,
            design_amps=design_amps,
            feeder=feeder,
            fault_ka=None,
            fault_x_over_r=None,
            capacity_amps=capacity,
            capacity_pct=100.0 * design_amps / capacity,
            spaces_total=panel.spaces,
            spaces_used=node.spaces_used,
            circuits=circuits,
            warnings=(),
            fed_from=node.parent.tag if node.parent else None,
            ancestors=self._ancestors(node),
        )
        return _Local(result, feeder, sort_warnings(warnings), self._feeder_z(feeder))

    def _ln_va(self, panel: Panel) -> Iterable[tuple[Circuit, float]]:
        for c in panel.circuits:
            if c.poles == 1 and c.feeds is None and c.counts(self.include_future):
                yield c, c.va or 0.0

    def _neutral_ampacity(self, feeder: FeederResult) -> float | None:
        if feeder.neutral is None:
            return None
        if feeder.neutral == feeder.conductor:
            return feeder.ampacity_amps
        # A different neutral size: same derating and terminal limit as the phase conductors.
        try:
            phase = _feeders.conductor_ampacity(feeder.conductor, feeder.material, 75)
            neutral = _feeders.conductor_ampacity(feeder.neutral, feeder.material, 75)
        except (KeyError, ValueError):
            return None
        return feeder.ampacity_amps * neutral / phase if phase else None

    def _circuit_results(self, node: _Node) -> tuple[CircuitResult, ...]:
        """Own circuits plus the feeding breakers, which carry their child's presented load."""
        feeds = [c for c in node.element.circuits if c.feeds is not None and c.poles > 0]  # type: ignore[union-attr]
        if not feeds:
            return tuple(node.own_circuits)
        by_tag = {ch.tag: ch for ch in node.children}
        extra: list[CircuitResult] = []
        for c in feeds:
            child = by_tag[c.feeds]  # type: ignore[index]
            up = child.up
            assert up is not None
            phases = breaker_phases(node.spec, c.slot, c.poles)
            extra.append(
                CircuitResult(
                    slot=c.slot,
                    slots=breaker_slots(c.slot, c.poles),
                    phases=phases,
                    phase_va={p: up.phase_va.get(p, 0.0) for p in phases},
                    amps=max((abs(up.line_i.get(p, 0j)) for p in phases), default=0.0),
                    counted=c.counts(self.include_future),
                    load_va=up.total_va(),
                )
            )
        return tuple(sorted([*node.own_circuits, *extra], key=lambda r: r.slot))

    def _ancestors(self, node: _Node) -> tuple[str, ...]:
        out = []
        p = node.parent
        while p is not None:
            out.append(p.tag)
            p = p.parent
        return tuple(out)

    def _local_transformer(self, node: _Node) -> _Local:
        t: Transformer = node.element  # type: ignore[assignment]
        sec = node.spec
        pri = node.primary
        parent = node.parent
        assert pri is not None and parent is not None and node.total is not None and node.up is not None
        agg = node.total
        dem = self._demand(agg)
        k = 1.0 + t.loss_pct / 100.0
        total_va, sec_amps, _rms, _neutral, _design, _dem_amps = self._currents(sec, agg, dem)
        load_kva = dem.demand_va * k / 1000.0
        three = sec.three_phase
        fla_pri = _xf.full_load_amps(t.kva, node.v_pri_winding, three)
        fla_sec = _xf.full_load_amps(t.kva, sec.nominal_v_ll(), three)
        warnings: list[CalcWarning] = []
        try:
            suggested = _xf.suggest_kva(load_kva, self.project.project.growth_margin_pct, three)
        except SizingError as exc:
            suggested = 0.0
            warnings.append(CalcWarning(WarningCode.NO_SIZE, f"{t.tag}: {exc}", t.tag, None, Severity.ERROR))
        prot = _xf.protection_450_3b(fla_pri, fla_sec)
        fraction = agg.h3_va / total_va if total_va > 0 else 0.0
        try:
            k_suggested = _xf.suggest_k_rating(_xf.k_factor(fraction))
        except SizingError as exc:
            k_suggested = None
            warnings.append(CalcWarning(WarningCode.NO_SIZE, f"{t.tag}: {exc}", t.tag, None, Severity.WARNING))
        loading = 100.0 * load_kva / t.kva
        if loading > 100.0 + 1e-9:
            warnings.append(
                CalcWarning(
                    WarningCode.TRANSFORMER_OVERLOAD,
                    f"{t.tag}: demand load {load_kva:.1f} kVA is {loading:.0f} % of its {t.kva:g} kVA rating",
                    t.tag,
                    None,
                    Severity.ERROR,
                )
            )
        # Primary feeder: sized for 125 % of the rated primary current (so the largest
        # NEC 450.3(B) primary-only device protects it) or the load's design current if larger.
        up = node.up
        pri_amps = {p: abs(up.line_i[p]) for p in node.primary_phases}
        pri_max = max(pri_amps.values()) if pri_amps else 0.0
        up_total = up.total_va()
        if up_total > 0:
            design_va = dem.demand_va + 0.25 * dem.continuous_demand_va
            load_design = pri_max * design_va / total_va
            load_amps = pri_max * dem.demand_va / total_va
        else:
            load_design = load_amps = 0.0
        if three:
            f_system = pri
        else:
            v = node.v_pri_winding
            f_system = _winding_spec(v, v)
        neutral = neutral_current(sum(up.line_i.values(), 0j), up.neutral_i3) if _primary_neutral(node) else None
        feeder, fwarn = self._feeder(
            tag=t.tag,
            feeder=t.feeder,
            system=f_system,
            design_amps=max(CONTINUOUS_FACTOR * fla_pri, load_design),
            load_amps=load_amps,
            pf=up.pf(),
            neutral_amps=neutral,
            harmonic_dominant=False,
            breaker_amps=node.via.breaker_amps if node.via is not None else None,
            # A neutral runs to the primary only when primary current returns on it.
            has_neutral=_primary_neutral(node),
        )
        warnings.extend(fwarn)
        result = TransformerResult(
            tag=t.tag,
            kva=t.kva,
            primary=t.primary,
            secondary=t.secondary,
            load_kva=load_kva,
            connected_kva=total_va * k / 1000.0,
            loading_pct=loading,
            fla_primary=fla_pri,
            fla_secondary=fla_sec,
            primary_line_amps=pri_amps,
            secondary_line_amps=sec_amps,
            secondary_fault_ka=None,
            suggested_kva=suggested,
            primary_ocpd_amps=prot.primary_only_amps,
            secondary_ocpd_amps=prot.secondary_amps,
            primary_ocpd_with_secondary_amps=prot.primary_with_secondary_amps,
            k_factor_suggested=k_suggested,
            feeder=feeder,
            warnings=(),
            fed_from=parent.tag,
            ancestors=self._ancestors(node),
        )
        return _Local(result, feeder, sort_warnings(warnings), self._feeder_z(feeder))

    def _local_source(self, node: _Node) -> _Local:
        s: Source = node.element  # type: ignore[assignment]
        agg = node.total
        assert agg is not None
        dem = self._demand(agg)
        total_va, line_amps, _rms, _n, design_amps, _d = self._currents(node.spec, agg, dem)
        result = SourceResult(
            tag=s.tag,
            system=s.system,
            connected_va=total_va,
            demand_va=dem.demand_va,
            demand_steps=dem.steps,
            design_amps=design_amps,
            line_amps=line_amps,
            fault_ka=s.fault_ka,
        )
        return _Local(result, None, ())

    # ---- step 4: top-down pass

    def _top_down(self, dirty: set[_Node] | None = None) -> None:
        """Cumulative voltage drop and fault current, parents first.

        A node is revisited only when its own local result or its parent's bus values
        (cumulative drop, impedance) changed, so an incremental update touches the edited
        branch and whatever hangs below a feeder whose drop moved.  With ``dirty`` (the nodes
        whose local result may have changed, each with its ancestors), a subtree holding no
        dirty node under an unchanged bus is skipped whole instead of being walked.
        """
        limit = self.project.project.vd_total_pct
        if dirty is None:
            for node in self.order:
                self._settle(node, limit)
            return
        stack = list(reversed(self.roots))
        while stack:
            node = stack.pop()
            self._settle(node, limit)
            bus_changed = node.bus_changed
            for child in reversed(node.children):
                if bus_changed or child in dirty or child.final_key is None or child.final_key[0] is not child.local:
                    stack.append(child)
                else:
                    child.bus_changed = False  # unchanged, and so is everything below it

    def _settle(self, node: _Node, limit: float) -> None:
        """One node of the top-down pass (see :meth:`_top_down`); its parent is already settled."""
        local = node.local
        assert local is not None
        parent = node.parent
        prev = node.final_key
        if parent is None:
            if prev is not None and prev[0] is local:
                node.bus_changed = False
                return
            s: Source = node.element  # type: ignore[assignment]
            spec = node.spec
            v = spec.nominal_v_ll() if spec.three_phase else spec.nominal_v_ll() * SQRT3
            # Single-phase source: the loop impedance V/I_sc (source_impedance divides by √3).
            z = _faults.source_impedance(v, s.fault_ka, s.x_over_r)
            node.bus_changed = prev is None or z != node.z_bus
            node.z_bus = z
            node.cum_vd = 0.0
            node.final = local.result
            self._reissued.append(node)
            node.final_key = (local,)
            node.final_by_severity = ()
            node.final_warnings = ()
            return
        if prev is not None and prev[0] is local and not parent.bus_changed:
            node.bus_changed = False
            return
        feeder = local.feeder
        total_vd = parent.cum_vd + (feeder.voltage_drop_pct if feeder is not None else 0.0)
        if node.kind == "panel":
            z = parent.z_bus + local.z_feeder * (1.0 if node.spec.three_phase else 2.0)
        else:
            z = self._secondary_z(node, parent.z_bus, local.z_feeder)
        if prev is not None and prev[0] is local and prev[1] == total_vd and z == node.z_bus:
            node.bus_changed = False
            return
        node.bus_changed = True
        node.cum_vd = total_vd
        same_z = prev is not None and z == node.z_bus
        if same_z and prev[3] is not None:
            fault_ka = prev[2]
        else:
            fault = _faults.bolted_fault_ka(z, node.spec)
            fault_ka = None if math.isinf(fault) else fault
        node.z_bus = z
        tag = node.tag
        vd_over = feeder is not None and total_vd > limit + 1e-9
        node_key = (local, total_vd, fault_ka, True, vd_over)
        new_feeder = _evolve(feeder, cumulative_voltage_drop_pct=total_vd) if feeder is not None else None
        if prev is not None and prev[0] is local and prev[2] == fault_ka and not vd_over and not prev[4]:
            # Same local result and fault, and no cumulative-drop warning before or now (its text
            # carries the value): the warnings are the ones this node already has.
            warnings = node.final_warnings  # type: ignore[assignment]
        else:
            extra: list[CalcWarning] = []
            if vd_over:
                extra.append(
                    CalcWarning(
                        WarningCode.VOLTAGE_DROP_TOTAL,
                        f"{tag}: cumulative voltage drop {total_vd:.2f} % from the source exceeds {limit:g} % "
                        f"({self.code.value} {self._vd_note} recommendation for feeder and branch circuit)",
                        tag,
                    )
                )
            if node.kind == "panel":
                panel: Panel = node.element  # type: ignore[assignment]
                if panel.sccr_ka is not None and fault_ka is not None and fault_ka > panel.sccr_ka + 1e-9:
                    extra.append(
                        CalcWarning(
                            WarningCode.SCCR_LOW,
                            f"{tag}: available fault current {fault_ka:.1f} kA exceeds the panel's "
                            f"{panel.sccr_ka:g} kA short-circuit current rating ({self.code.value} 110.9 / 110.10)",
                            tag,
                            None,
                            Severity.ERROR,
                        )
                    )
            warnings = sort_warnings([*local.warnings, *extra]) if extra else local.warnings
        if node.kind == "panel":
            x_over_r = node.final.fault_x_over_r if same_z else _faults.x_over_r(z)  # type: ignore[union-attr]
            node.final = _evolve(
                local.result, feeder=new_feeder, fault_ka=fault_ka, fault_x_over_r=x_over_r, warnings=warnings
            )
        else:
            node.final = _evolve(local.result, feeder=new_feeder, secondary_fault_ka=fault_ka, warnings=warnings)
        node.final_key = node_key
        self._reissued.append(node)
        if warnings is not node.final_warnings:
            node.final_warnings = warnings
            groups = tuple(tuple(w for w in warnings if w.severity is sev) for sev in _SEVERITY_ORDER)
            if groups != node.final_by_severity:
                if any(groups) != any(node.final_by_severity):
                    self._warned = None  # the node joins or leaves the nodes with warnings
                node.final_by_severity = groups
                self._warnings_dirty = True

    def _feeder_z(self, feeder: FeederResult | None) -> complex:
        if feeder is None or feeder.length_ft <= 0:
            return 0j
        return _vd.feeder_impedance_ohm(
            feeder.conductor, feeder.material, feeder.conduit, feeder.length_ft, feeder.sets
        )

    def _secondary_z(self, node: _Node, z_parent: complex, z_feeder: complex) -> complex:
        """Impedance at a transformer's secondary terminals, referred to the secondary (ohms).

        Three-phase: per-phase (source + primary feeder referred by (V_sec/V_pri)²) + Z_T.
        Single-phase: the fault loop of :func:`server.calc.faults.single_phase_loop_impedance`;
        the upstream per-phase impedance is the parent bus (per phase when the parent is
        three-phase, already a loop when it is single-phase: then halved) plus the primary
        feeder's one-way impedance.
        """
        t: Transformer = node.element  # type: ignore[assignment]
        sec = node.spec
        parent = node.parent
        assert parent is not None
        v_sec = sec.nominal_v_ll()
        z_t = _faults.transformer_impedance(t.kva, t.impedance_pct, t.x_over_r, v_sec, sec.three_phase)
        per_phase_parent = z_parent if parent.spec.three_phase else z_parent / 2.0
        z_up = _faults.refer_impedance(per_phase_parent + z_feeder, node.v_pri_winding, v_sec)
        if sec.three_phase:
            return z_up + z_t
        return _faults.single_phase_loop_impedance(z_t, z_up)

    # ---- assembly

    def _assemble(self) -> None:
        panels: dict[str, PanelResult] = {}
        transformers: dict[str, TransformerResult] = {}
        sources: dict[str, SourceResult] = {}
        prev = self._result
        if prev is None:
            nodes = self.nodes
            for p in self.project.panels:
                panels[p.tag] = nodes[p.tag].final  # type: ignore[assignment]
            for t in self.project.transformers:
                transformers[t.tag] = nodes[t.tag].final  # type: ignore[assignment]
            for s in self.project.sources:
                sources[s.tag] = nodes[s.tag].final  # type: ignore[assignment]
        else:
            # After update_panel: same elements in the same order, only the re-issued results are
            # new.  Copies of the previous dicts, so a result handed out earlier never changes.
            panels, transformers, sources = dict(prev.panels), dict(prev.transformers), dict(prev.sources)
            by_kind: dict[str, dict] = {"panel": panels, "transformer": transformers, "source": sources}
            for node in self._reissued:
                by_kind[node.kind][node.tag] = node.final
        self._reissued = []
        # Every node's warnings carry its own tag and are already sorted, so the project list
        # (severity, then tag, slot, code) is a concatenation in (severity, tag) order; it is
        # rebuilt only when some node's warnings changed.
        if self._warnings_dirty:
            warnings: list[CalcWarning] = []
            if self._warned is None:
                self._warned = [n for n in self.by_tag if any(n.final_by_severity)]
            warned = self._warned
            for rank in range(len(_SEVERITY_ORDER)):
                for node in warned:
                    group = node.final_by_severity[rank]
                    if group:
                        warnings.extend(group)
            self._all_warnings = tuple(warnings)
            self._warnings_dirty = False
        self._result = ProjectResult(
            code=self.code.value,
            include_future=self.include_future,
            panels=panels,
            transformers=transformers,
            sources=sources,
            warnings=self._all_warnings,
        )

    # ---- public API

    def result(self) -> ProjectResult:
        return self._result

    def release(self) -> None:
        """Drop the cached tree (parent ↔ child links form reference cycles), so a calculator that
        is done with frees its memory at once instead of waiting for the cyclic garbage collector.
        Results already returned stay valid; the calculator cannot be updated afterwards."""
        for node in self.nodes.values():
            node.parent = None
            node.children = []
        self.nodes = {}
        self.order = []
        self.roots = []
        self.by_tag = []

    def update_panel(self, panel: Panel, *, checked_project: Project | None = None) -> ProjectResult:
        """Replace one panel (same tag) and recompute incrementally; identical to a full compute.

        The panel is checked first (:func:`server.calc.projectfile.check_panel`).  A change of
        the tree (what the panel feeds, the poles or status of a feeding breaker, its system or
        ``fed_from``) rebuilds the whole project after the topology check; anything else
        recomputes the panel, its ancestors and the top-down pass only.

        ``checked_project``: a caller that has already run ``check_panel`` on ``panel`` (and
        ``check_topology`` when a feeding breaker changed) passes the project it built with
        :func:`server.calc.projectfile.replace_panel`, so the checks are not run twice.
        """
        node = self.nodes.get(panel.tag)
        if node is None or node.kind != "panel":
            raise ProjectFileError([Problem("is not a panel of this project", panel.tag)])
        problems: list[Problem] = []
        if checked_project is None:
            check_panel(panel, problems)
            if problems:
                raise ProjectFileError(problems)
            new_project = replace_panel(self.project, panel)
        else:
            if checked_project.panel(panel.tag) is not panel:
                raise ValueError("checked_project does not hold this panel")
            new_project = checked_project
        old: Panel = node.element  # type: ignore[assignment]
        if _tree_signature(old) != _tree_signature(panel) or old.fed_from != panel.fed_from:
            check_topology(new_project, problems)
            if problems:
                raise ProjectFileError(problems)
            self._build(new_project)
            return self._result
        self.project = new_project
        node.element = panel
        _own_circuits(node, self.include_future, self.code.value)
        # The feeding breakers' ratings may have changed: their children's feeders follow.
        by_slot = {c.feeds: c for c in panel.circuits if c.feeds is not None and c.poles > 0}
        dirty: set[_Node] = set()
        for child in node.children:
            new_via = by_slot[child.tag]
            if new_via != child.via:
                child.via = new_via
                self._local(child)
                dirty.add(child)
        n: _Node | None = node
        while n is not None:
            self._aggregate(n)
            self._local(n)
            dirty.add(n)
            n = n.parent
        self._top_down(dirty)
        self._assemble()
        return self._result


def _add_metered(agg: _Agg, spec: SystemSpec, va: float) -> None:
    """Add a metered existing load: one balanced load over every phase of ``spec`` at METERED_PF."""
    if va <= 0.0:
        return
    n = len(spec.phases)
    pf = METERED_PF
    q = va * math.sqrt(1.0 - pf * pf)
    s_conj = complex(va * pf, -q)
    for p, s in phase_shares(spec, 1, n):
        agg.phase_va[p] += va * s
    for p, k in current_coefficients(spec, 1, n):
        agg.line_i[p] += s_conj * k
    key = _demand.METERED_EXISTING
    agg.by_cat[key] = agg.by_cat.get(key, 0.0) + va
    agg.p_w += va * pf
    agg.q_var += q


_ROTATION_ORDER = ("A", "B", "C")
#: exp(−j·120°·r): a child's phase-A current (its own A at 0°) landed on upstream phase index r
#: lags the upstream A by 120°·r.
_ROTATION_FACTOR = tuple(cmath.rect(1.0, -2.0 * math.pi * r / 3.0) for r in range(3))


def _rotated(total: _Agg, rotation: int) -> _Agg:
    """What a panel whose feeder is landed rotated by ``rotation`` steps presents upstream.

    Phase index i of the panel lands on upstream phase index (i + r) % 3 (a cyclic relabelling
    that keeps the phase sequence).  VA and third-harmonic line currents are relabelled; the
    fundamental phasors, computed with the panel's own A at 0°, are also turned by
    exp(−j·120°·r) so they sit on the upstream phase's angle; third-harmonic phasors turn by
    3 × that (a whole turn), so the triplen neutral phasor is unchanged.  Counts, P, Q and the
    harmonic VA do not depend on phase labels.
    """
    up = _Agg(_ROTATION_ORDER)
    up.merge_counts(total)
    k = _ROTATION_FACTOR[rotation]
    order = _ROTATION_ORDER
    for i, p in enumerate(order):
        q = order[(i + rotation) % 3]
        up.phase_va[q] = total.phase_va.get(p, 0.0)
        up.line_i[q] = total.line_i.get(p, 0j) * k
        up.line_i3[q] = total.line_i3.get(p, 0.0)
    up.neutral_i3 = total.neutral_i3
    up.h3_ln_va = total.h3_ln_va
    up.h3_va = total.h3_va
    return up


def _primary_neutral(node: _Node) -> bool:
    """Whether a transformer's primary current returns on the feeding system's neutral: a grounded
    wye–wye bank, or a single-phase transformer connected line to neutral."""
    parent = node.parent
    if parent is None or not parent.spec.has_neutral or node.primary is None:
        return False
    if node.spec.three_phase:
        return winding_connection(node.primary) == "wye" and winding_connection(node.spec) == "wye"
    return len(node.primary_phases) == 1


def _tree_signature(panel: Panel) -> tuple:
    """What of a panel shapes the tree: its system and the breakers that feed something."""
    return (
        panel.system,
        tuple((c.slot, c.poles, c.feeds, c.status) for c in panel.circuits if c.feeds is not None),
    )


def compute_project(
    project: Project,
    *,
    include_future: bool | None = None,
    existing_load_override_va: Mapping[str, float] | None = None,
) -> ProjectResult:
    """Full calculation of a project (see the module docstring)."""
    calc = Calculator(project, include_future=include_future, existing_load_override_va=existing_load_override_va)
    result = calc.result()
    calc.release()
    return result
