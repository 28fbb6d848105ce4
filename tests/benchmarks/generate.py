"""Deterministic generator of a large invented project for benchmarks (and property tests).

Default shape: 500 panels × 42 circuits = 21 000 circuits, four levels deep:

    8 sources (480Y/277) → 8 MDPs (480Y/277, 4000 A) → 48 transformers (40 three-phase
    480Δ–208Y/120, 8 single-phase 480–120/240) → 96 panels → 396 sub-panels

Every panel holds exactly ``circuits_per_panel`` circuit entries (feeding breakers, loads,
spares and a few spaces) with a realistic mix of load categories, poles, power factors,
third-harmonic content, continuous flags and life-cycle statuses.  The same seed always
gives the same project.  Run ``python -m tests.benchmarks.generate OUT.json`` to write it.
"""

from __future__ import annotations

import random
import sys
from dataclasses import dataclass, field, replace
from pathlib import Path

from server.calc.model import (
    Category,
    Circuit,
    CodeEdition,
    Feeder,
    Occupancy,
    Panel,
    Project,
    ProjectInfo,
    Source,
    Status,
    Transformer,
)
from server.calc.projectfile import dumps_project
from server.calc.systems import SYSTEMS

SEED = 20_261_202
W480 = "480Y/277 3PH 4W"
D480 = "480 3PH 3W"
W208 = "208Y/120 3PH 4W"
SPLIT = "120/240 1PH 3W"
BREAKERS = (15, 20, 25, 30, 35, 40, 45, 50, 60, 70, 80, 90, 100, 110, 125, 150, 175, 200, 225, 250, 300, 350, 400)
KVA_3PH = (45.0, 75.0, 112.5, 150.0, 225.0, 300.0, 500.0, 750.0, 1000.0)
KVA_1PH = (25.0, 37.5, 50.0, 75.0, 100.0, 167.0, 250.0, 333.0, 500.0)

# (category, weight, allowed poles, VA range)
_MIX: tuple[tuple[Category, int, tuple[int, ...], tuple[float, float]], ...] = (
    (Category.LIGHTING, 24, (1,), (300.0, 1_200.0)),
    (Category.RECEPTACLE, 34, (1,), (180.0, 1_080.0)),
    (Category.MOTOR, 8, (1, 2, 3), (500.0, 3_700.0)),
    (Category.COOLING, 5, (2, 3), (2_000.0, 6_000.0)),
    (Category.HEATING, 5, (2, 3), (1_500.0, 5_000.0)),
    (Category.KITCHEN, 5, (1, 2), (800.0, 2_500.0)),
    (Category.EV_CHARGING, 2, (2,), (3_000.0, 7_600.0)),
    (Category.EQUIPMENT, 13, (1, 2, 3), (200.0, 3_000.0)),
    (Category.SPARE, 4, (1,), (0.0, 0.0)),
)


def _panel_va(panel: Panel) -> float:
    return sum(c.va or 0.0 for c in panel.circuits if c.feeds is None)


def _breaker(amps: float) -> int:
    for b in BREAKERS:
        if b >= amps:
            return b
    return BREAKERS[-1]


@dataclass
class _Slots:
    """Fills a panel's slots left and right, row by row, like a layout engineer would."""

    n_phases: int
    left: int = 1
    right: int = 2
    taken: int = 0
    turn: int = 0

    def take(self, poles: int) -> int:
        side = self.turn % 2
        self.turn += 1
        if side == 0:
            slot, self.left = self.left, self.left + 2 * max(poles, 1)
        else:
            slot, self.right = self.right, self.right + 2 * max(poles, 1)
        return slot

    def spaces(self) -> int:
        top = max(self.left, self.right)  # next free slot on the fuller side
        return max(42, top + (top % 2))


@dataclass
class _PanelPlan:
    tag: str
    system: str
    feeds: list[tuple[str, int, int]] = field(default_factory=list)  # (child tag, poles, breaker)


def _load(rng: random.Random, n_phases: int, system: str) -> tuple[Category, int, float]:
    weights = [m[1] for m in _MIX]
    cat, _, poles_allowed, (lo, hi) = rng.choices(_MIX, weights=weights)[0]
    poles = rng.choice([p for p in poles_allowed if p <= n_phases] or [1])
    va = round(rng.uniform(lo, hi), -1)
    if system == W480 and poles == 1 and cat in (Category.RECEPTACLE, Category.KITCHEN):
        cat = Category.LIGHTING  # no 277 V receptacles
    return cat, poles, va


def _circuits(rng: random.Random, plan: _PanelPlan, count: int) -> tuple[tuple[Circuit, ...], int]:
    spec = SYSTEMS[plan.system]
    n = len(spec.phases)
    slots = _Slots(n)
    out: list[Circuit] = []
    for child, poles, breaker in plan.feeds:
        out.append(Circuit(slot=slots.take(poles), poles=poles, feeds=child, breaker_amps=breaker, description=child))
    while len(out) < count:
        if rng.random() < 0.03:
            out.append(Circuit(slot=slots.take(0), poles=0, description="space"))
            continue
        cat, poles, va = _load(rng, n, plan.system)
        v = spec.v_ln if poles == 1 else spec.v_ll
        amps = va / ((3**0.5) * spec.v_ll) if poles == 3 else va / (v or spec.v_ll)
        status = rng.choices((Status.NEW, Status.EXISTING, Status.FUTURE, Status.REMOVED), weights=(55, 35, 6, 4))[0]
        h3 = 0.0
        if cat in (Category.RECEPTACLE, Category.LIGHTING) and poles == 1 and rng.random() < 0.3:
            h3 = float(rng.choice((15, 30, 60)))
        pf = None if rng.random() < 0.6 else round(rng.uniform(0.75, 1.0), 2)
        out.append(
            Circuit(
                slot=slots.take(poles),
                poles=poles,
                description=f"{cat.value} {len(out) + 1}",
                category=cat,
                va=va if cat != Category.SPARE else None,
                pf=pf,
                continuous=None if rng.random() < 0.8 else rng.random() < 0.5,
                breaker_amps=_breaker(max(amps * 1.25, 15.0)),
                status=status,
                harmonic3_pct=h3,
            )
        )
    out.sort(key=lambda c: c.slot)
    return tuple(out), slots.spaces()


def generate_project(
    *,
    panels: int = 500,
    circuits_per_panel: int = 42,
    sources: int = 8,
    transformers_per_mdp: int = 6,
    panels_per_transformer: int = 2,
    seed: int = SEED,
) -> Project:
    """A valid invented project of ``panels`` panels (MDPs + secondary panels + sub-panels)."""
    rng = random.Random(seed)
    n_mdp = sources
    n_xf = n_mdp * transformers_per_mdp
    n_l3 = n_xf * panels_per_transformer
    n_l4 = max(panels - n_mdp - n_l3, 0)
    if n_mdp + n_l3 > panels:
        raise ValueError("too few panels for the requested tree")
    per_l3, extra = divmod(n_l4, n_l3)

    srcs = [Source(tag=f"UTIL-{i + 1}", system=W480, fault_ka=65.0, x_over_r=8.0) for i in range(n_mdp)]
    mdps = [_PanelPlan(f"MDP-{i + 1}", W480) for i in range(n_mdp)]
    xfs: list[tuple[str, str, str]] = []  # (tag, secondary, mdp)
    l3: list[tuple[_PanelPlan, str]] = []  # (plan, transformer)
    l4: list[tuple[_PanelPlan, str]] = []
    k = 0
    for mi, mdp in enumerate(mdps):
        for ti in range(transformers_per_mdp):
            single = ti == transformers_per_mdp - 1  # one single-phase transformer per MDP
            tag = f"T-{mi + 1}{ti + 1:02d}"
            secondary = SPLIT if single else W208
            xfs.append((tag, secondary, mdp.tag))
            mdp.feeds.append((tag, 2 if single else 3, 0))
            for pi in range(panels_per_transformer):
                plan = _PanelPlan(f"P-{mi + 1}{ti + 1:02d}{pi + 1}", secondary)
                l3.append((plan, tag))
                subs = per_l3 + (1 if k < extra else 0)
                k += 1
                for si in range(subs):
                    sub = _PanelPlan(f"{plan.tag}-{si + 1}", secondary)
                    plan.feeds.append((sub.tag, len(SYSTEMS[secondary].phases), 150))
                    l4.append((sub, plan.tag))

    built: dict[str, Panel] = {}

    def build(plan: _PanelPlan, fed_from: str | None, length: float, bus: int) -> Panel:
        circuits, spaces = _circuits(rng, plan, circuits_per_panel)
        return Panel(
            tag=plan.tag,
            system=plan.system,
            fed_from=fed_from,
            bus_amps=bus,
            main_amps=None,
            spaces=spaces,
            sccr_ka=rng.choice((10.0, 22.0, 42.0, 65.0)),
            feeder=Feeder(length_ft=length),
            circuits=circuits,
            description="generated",
        )

    for sub, _parent in l4:
        built[sub.tag] = build(sub, None, round(rng.uniform(20, 150)), 225)
    for plan, xf in l3:
        # Feeding breakers sized from 125 % of each sub-panel's connected load.
        plan.feeds = [
            (
                tag,
                poles,
                _breaker(1.25 * _panel_va(built[tag]) / SYSTEMS[plan.system].v_ll / (3**0.5 if poles == 3 else 1.0)),
            )
            for tag, poles, _ in plan.feeds
        ]
        built[plan.tag] = build(plan, xf, round(rng.uniform(10, 80)), 1200)
    # Transformer sizes from a rough estimate of what they carry.
    connected: dict[str, float] = {}

    def subtree_va(tag: str) -> float:
        p = built[tag]
        total = sum((c.va or 0.0) for c in p.circuits if c.feeds is None)
        return total + sum(subtree_va(c.feeds) for c in p.circuits if c.feeds is not None)

    transformers: list[Transformer] = []
    for tag, secondary, _mdp in xfs:
        va = sum(subtree_va(plan.tag) for plan, xf in l3 if xf == tag)
        connected[tag] = va
        three = secondary == W208
        sizes = KVA_3PH if three else KVA_1PH
        need = va * 0.8 / 1000.0
        kva = next((s for s in sizes if s >= need), sizes[-1])
        transformers.append(
            Transformer(
                tag=tag,
                kva=kva,
                primary=D480,
                secondary=secondary,
                impedance_pct=round(rng.uniform(3.5, 6.0), 1),
                x_over_r=round(rng.uniform(3.0, 8.0), 1),
                feeder=Feeder(length_ft=round(rng.uniform(10, 200))),
                loss_pct=rng.choice((0.0, 0.0, 1.5, 2.5)),
            )
        )
    by_tag = {t.tag: t for t in transformers}
    for source, mdp in zip(srcs, mdps, strict=True):
        feeds = []
        for tag, poles, _ in mdp.feeds:
            rated = 1000.0 * by_tag[tag].kva / ((3**0.5 if poles == 3 else 1.0) * 480.0)
            feeds.append((tag, poles, _breaker(1.25 * rated)))
        mdp.feeds = feeds
        built[mdp.tag] = replace(build(mdp, None, 30.0, 4000), fed_from=source.tag)

    order = [m.tag for m in mdps] + [p.tag for p, _ in l3] + [s.tag for s, _ in l4]
    return Project(
        project=ProjectInfo(
            name="Generated campus (invented)",
            number="BENCH-500",
            code=CodeEdition.NEC_2023,
            occupancy=Occupancy.OFFICE,
        ),
        sources=tuple(srcs),
        transformers=tuple(transformers),
        panels=tuple(built[t] for t in order),
    )


def write_json(path: str | Path, project: Project | None = None) -> Path:
    out = Path(path)
    out.write_text(dumps_project(project or generate_project()), encoding="utf-8")
    return out


if __name__ == "__main__":
    target = sys.argv[1] if len(sys.argv) > 1 else "generated_project.json"
    print(write_json(target))
