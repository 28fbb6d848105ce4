"""Reading, validating and writing the version-1 project file (JSON).

This is the one validation path: the CLI, the JSON API, the web forms and the spreadsheet
import all build a dict in this format and call :func:`parse_project` (or
:func:`parse_circuit` for one row), so the rules below are stated once.

Rules (each breach is a :class:`~server.calc.errors.Problem` naming the tag, slot and field):

* ``format`` is ``"panelwright.project"`` and ``version`` is 1.
* Every ``system`` is an accepted string (:data:`server.calc.systems.SYSTEMS`).
* Tags are unique across sources, transformers and panels.
* Slots are 1..``spaces``; a breaker of P poles at slot s takes s, s+2, s+4; overlaps, slots
  beyond ``spaces``, a 1-pole load on a 3-wire delta, a line-to-neutral load on the high leg,
  a 2-pole load on a 2-wire system and a 3-pole load on a single-phase system are errors.
* ``va`` ≥ 0, 0 < ``pf`` ≤ 1, ``harmonic3_pct`` 0–300, ``breaker_amps`` > 0.
* A circuit with ``feeds`` carries a downstream panel or transformer; its ``va`` is computed
  and may not be typed.  Every element is fed exactly once; loops, dangling tags and a panel
  whose system does not match what feeds it are errors naming the tags.
* ``feeder_rotation`` (optional, default 0) is 0, 1 or 2, and may be non-zero only on a
  three-phase panel without a high leg fed from a three-phase system without a high leg.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Mapping
from dataclasses import fields
from enum import StrEnum
from pathlib import Path
from typing import Any, TypeVar

from .errors import Problem, ProjectFileError
from .model import (
    FORMAT_NAME,
    FORMAT_VERSION,
    Category,
    Circuit,
    CodeEdition,
    Conduit,
    Feeder,
    Material,
    Occupancy,
    Panel,
    Project,
    ProjectInfo,
    Source,
    Status,
    Transformer,
)
from .systems import SYSTEMS, SystemKind, breaker_phases, breaker_slots

E = TypeVar("E", bound=StrEnum)

MAX_SPACES = 200
MAX_POLES = 3


class _Reader:
    """Reads one JSON object field by field, collecting problems instead of stopping."""

    def __init__(
        self,
        data: Any,
        problems: list[Problem],
        *,
        tag: str | None = None,
        slot: int | None = None,
        prefix: str = "",
    ) -> None:
        self.problems = problems
        self.tag = tag
        self.slot = slot
        self.prefix = prefix
        if not isinstance(data, Mapping):
            self.add("", f"must be a JSON object, not {type(data).__name__}")
            data = {}
        self.data: Mapping[str, Any] = data

    def add(self, name: str, message: str) -> None:
        fieldname = f"{self.prefix}{name}" if name else (self.prefix.rstrip(".") or None)
        self.problems.append(Problem(message, tag=self.tag, slot=self.slot, field=fieldname))

    def has(self, name: str) -> bool:
        return self.data.get(name) is not None

    def text(self, name: str, default: str = "", *, required: bool = False, max_len: int = 500) -> str:
        value = self.data.get(name)
        if value is None:
            if required:
                self.add(name, "is required")
            return default
        if not isinstance(value, str):
            self.add(name, f"must be text, not {json.dumps(value)}")
            return default
        value = value.strip()
        if required and not value:
            self.add(name, "is required")
        if len(value) > max_len:
            self.add(name, f"is longer than {max_len} characters")
            return value[:max_len]
        return value

    def opt_text(self, name: str) -> str | None:
        if self.data.get(name) is None:
            return None
        value = self.text(name)
        return value or None

    def number(
        self,
        name: str,
        default: float | None,
        *,
        minimum: float | None = None,
        maximum: float | None = None,
        exclusive_min: bool = False,
        required: bool = False,
    ) -> float | None:
        value = self.data.get(name)
        if value is None:
            if required:
                self.add(name, "is required")
            return default
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            if isinstance(value, str):
                try:
                    value = float(value.strip())
                except ValueError:
                    self.add(name, f"must be a number, not {json.dumps(value)}")
                    return default
            else:
                self.add(name, f"must be a number, not {json.dumps(value)}")
                return default
        value = float(value)
        if not math.isfinite(value):
            self.add(name, "must be a finite number")
            return default
        if minimum is not None and (value < minimum or (exclusive_min and value <= minimum)):
            op = "greater than" if exclusive_min else "at least"
            self.add(name, f"must be {op} {_fmt(minimum)} (got {_fmt(value)})")
            return default
        if maximum is not None and value > maximum:
            self.add(name, f"must be at most {_fmt(maximum)} (got {_fmt(value)})")
            return default
        return value

    def integer(
        self,
        name: str,
        default: int | None,
        *,
        minimum: int | None = None,
        maximum: int | None = None,
        required: bool = False,
    ) -> int | None:
        value = self.number(name, None, minimum=minimum, maximum=maximum, required=required)
        if value is None:
            return default
        if value != int(value):
            self.add(name, f"must be a whole number (got {_fmt(value)})")
            return default
        return int(value)

    def boolean(self, name: str, default: bool | None) -> bool | None:
        value = self.data.get(name)
        if value is None:
            return default
        if isinstance(value, bool):
            return value
        if isinstance(value, str) and value.strip().lower() in {"true", "yes", "y", "1"}:
            return True
        if isinstance(value, str) and value.strip().lower() in {"false", "no", "n", "0", ""}:
            return False
        self.add(name, f"must be true or false, not {json.dumps(value)}")
        return default

    def choice(self, name: str, enum: type[E], default: E | None) -> E | None:
        value = self.data.get(name)
        if value is None or value == "":
            return default
        try:
            return enum(value)
        except ValueError:
            allowed = ", ".join(repr(e.value) for e in enum)
            self.add(name, f"{json.dumps(value)} is not one of {allowed}")
            return default

    def system(self, name: str) -> str:
        value = self.text(name, required=True)
        if value and value not in SYSTEMS:
            self.add(
                name,
                f"unknown system {value!r}; accepted forms: " + ", ".join(repr(s) for s in SYSTEMS),
            )
        return value


def _fmt(x: float) -> str:
    return f"{x:g}"


def conductor_sizes_for(material: Material) -> tuple[str, ...]:
    """Sizes Table 310.16 lists for ``material`` (no 14 AWG aluminium)."""
    from .tables import ampacity_a, conductor_sizes

    return tuple(s for s in conductor_sizes() if ampacity_a(s, material, 75) is not None)


def _parse_feeder(raw: Any, problems: list[Problem], tag: str) -> Feeder:
    if raw is None:
        return Feeder()
    r = _Reader(raw, problems, tag=tag, prefix="feeder.")
    size = r.opt_text("size")
    egc = r.opt_text("egc")
    neutral = r.opt_text("neutral_size")
    if size is not None or egc is not None or neutral is not None:
        from .tables import conductor_sizes  # local: tables load data files

        known = conductor_sizes()
        for name, value in (("size", size), ("egc", egc), ("neutral_size", neutral)):
            if value is not None and value not in known:
                r.add(name, f"unknown conductor size {value!r}; use AWG (14…4/0) or kcmil (250…1000)")
    insulation = r.integer("insulation_c", 75)
    if insulation not in (60, 75, 90):
        r.add("insulation_c", "must be 60, 75 or 90 (°C column of NEC Table 310.16)")
        insulation = 75
    terminal = r.integer("terminal_c", 75)
    if terminal not in (60, 75):
        r.add("terminal_c", "must be 60 or 75 (°C terminal rating, NEC 110.14(C))")
        terminal = 75
    material = r.choice("material", Material, Material.CU) or Material.CU
    for name, value in (("size", size), ("neutral_size", neutral)):
        if value is not None and value not in conductor_sizes_for(material):
            r.add(name, f"{value} {material.value} has no row in NEC Table 310.16; use a larger size")
    return Feeder(
        length_ft=r.number("length_ft", 0.0, minimum=0.0, maximum=100_000.0) or 0.0,
        material=material,
        conduit=r.choice("conduit", Conduit, Conduit.STEEL) or Conduit.STEEL,
        sets=r.integer("sets", None, minimum=1, maximum=20),
        size=size,
        insulation_c=insulation or 75,
        ambient_c=r.number("ambient_c", 30.0, minimum=-40.0, maximum=90.0) or 30.0,
        terminal_c=terminal or 75,
        ocpd_amps=r.integer("ocpd_amps", None, minimum=1, maximum=10_000),
        egc=egc,
        neutral_size=neutral,
    )


def parse_circuit(raw: Any, problems: list[Problem], *, tag: str, index: int = 0) -> Circuit | None:
    """Parse one circuit row (without panel-level checks).  Returns None if the slot is unusable."""
    slot_value = raw.get("slot") if isinstance(raw, Mapping) else None
    slot = slot_value if isinstance(slot_value, int) and not isinstance(slot_value, bool) else None
    r = _Reader(raw, problems, tag=tag, slot=slot)
    if slot is None:
        r.prefix = f"circuits[{index}]."
        slot = r.integer("slot", None, minimum=1, maximum=MAX_SPACES, required=True)
        r.prefix = ""
        if slot is None:
            return None
        r.slot = slot
    elif slot < 1:
        r.add("slot", f"must be at least 1 (got {slot})")
        return None
    poles = r.integer("poles", 1, minimum=0, maximum=MAX_POLES)
    feeds = r.opt_text("feeds")
    va = r.number("va", None, minimum=0.0, maximum=1e9)
    if feeds is not None and r.has("va"):
        r.add("va", f"is computed from {feeds}, never typed; leave it empty")
        va = None
    pf = r.number("pf", None, minimum=0.0, maximum=1.0, exclusive_min=True)
    if poles == 0 and (feeds or (va or 0) > 0):
        r.add("poles", "a space (0 poles) cannot carry a load or feed anything")
    return Circuit(
        slot=slot,
        poles=poles if poles is not None else 1,
        description=r.text("description"),
        category=r.choice("category", Category, None),
        va=va,
        pf=pf,
        continuous=r.boolean("continuous", None),
        breaker_amps=r.integer("breaker_amps", None, minimum=1, maximum=10_000),
        status=r.choice("status", Status, Status.NEW) or Status.NEW,
        harmonic3_pct=r.number("harmonic3_pct", 0.0, minimum=0.0, maximum=300.0) or 0.0,
        feeds=feeds,
        locked=bool(r.boolean("locked", False)),
        notes=r.text("notes", max_len=2000),
    )


def check_circuit_fits(panel: Panel, circuit: Circuit, problems: list[Problem]) -> None:
    """Checks of one circuit against its panel's system and size (overlaps are checked per panel)."""
    spec = SYSTEMS.get(panel.system)
    if circuit.is_space:
        if circuit.slot > panel.spaces:
            problems.append(
                Problem(f"slot is beyond the panel's {panel.spaces} spaces", panel.tag, circuit.slot, "slot")
            )
        return
    for s in breaker_slots(circuit.slot, circuit.poles):
        if s > panel.spaces:
            problems.append(
                Problem(
                    f"a {circuit.poles}-pole breaker at slot {circuit.slot} needs slot {s}, "
                    f"beyond the panel's {panel.spaces} spaces",
                    panel.tag,
                    circuit.slot,
                    "slot",
                )
            )
            break
    if spec is None:
        return
    n = len(spec.phases)
    if circuit.poles > n:
        kind = "single-phase" if n < 3 else "three-phase"
        problems.append(
            Problem(
                f"a {circuit.poles}-pole load cannot sit on a {spec.name} ({kind}, {n} line"
                f"{'s' if n > 1 else ''}) panel",
                panel.tag,
                circuit.slot,
                "poles",
            )
        )
        return
    if circuit.poles == 1 and not spec.has_neutral:  # feeding breakers too: a 1-pole feed is line-to-neutral
        problems.append(
            Problem(
                f"a 1-pole (line-to-neutral) load is impossible on {spec.name}: a 3-wire delta has no neutral",
                panel.tag,
                circuit.slot,
                "poles",
            )
        )
    if circuit.poles == 1 and spec.high_leg:
        phases = breaker_phases(spec, circuit.slot, 1)
        if phases[0] == spec.high_leg:
            problems.append(
                Problem(
                    f"slot {circuit.slot} is on the high leg ({spec.high_leg}, about 208 V to neutral); "
                    "a line-to-neutral load may not be connected there",
                    panel.tag,
                    circuit.slot,
                    "slot",
                )
            )


def _parse_panel(raw: Any, problems: list[Problem], index: int) -> Panel | None:
    tag_value = raw.get("tag") if isinstance(raw, Mapping) else None
    tag = tag_value.strip() if isinstance(tag_value, str) else None
    r = _Reader(raw, problems, tag=tag, prefix="" if tag else f"panels[{index}].")
    if not tag:
        r.text("tag", required=True)
        return None
    system = r.system("system")
    spaces = r.integer("spaces", 42, minimum=1, maximum=MAX_SPACES) or 42
    circuits_raw = r.data.get("circuits") or []
    if not isinstance(circuits_raw, list):
        r.add("circuits", "must be a list")
        circuits_raw = []
    circuits: list[Circuit] = []
    for i, c_raw in enumerate(circuits_raw):
        c = parse_circuit(c_raw, problems, tag=tag, index=i)
        if c is not None:
            circuits.append(c)
    circuits.sort(key=lambda c: c.slot)
    panel = Panel(
        tag=tag,
        system=system,
        fed_from=r.opt_text("fed_from"),
        bus_amps=r.integer("bus_amps", 225, minimum=1, maximum=10_000) or 225,
        main_amps=r.integer("main_amps", None, minimum=1, maximum=10_000),
        spaces=spaces,
        sccr_ka=r.number("sccr_ka", None, minimum=0.0, maximum=1000.0, exclusive_min=True),
        feeder=_parse_feeder(r.data.get("feeder"), problems, tag),
        circuits=tuple(circuits),
        description=r.text("description"),
        location=r.text("location"),
        mounting=r.text("mounting"),
        feeder_rotation=_feeder_rotation(r),
    )
    check_panel(panel, problems)
    return panel


FEEDER_ROTATIONS = (0, 1, 2)


def _feeder_rotation(r: _Reader) -> int:
    value = r.integer("feeder_rotation", 0)
    if value not in FEEDER_ROTATIONS:
        r.add(
            "feeder_rotation",
            f"must be 0, 1 or 2 (0 = A→A, B→B, C→C; 1 = A→B, B→C, C→A; 2 = A→C, B→A, C→B), not {value}",
        )
        return 0
    return value


def rotation_allowed(system: str) -> bool:
    """Whether a panel on ``system`` may have its feeder landed rotated: three-phase, no high leg."""
    spec = SYSTEMS.get(system)
    return spec is not None and spec.three_phase and spec.high_leg is None


def check_panel(panel: Panel, problems: list[Problem]) -> None:
    """Panel-level checks: each circuit fits the system and size, no two breakers overlap, and a
    feeder rotation sits only on a three-phase panel without a high leg."""
    if panel.feeder_rotation and panel.system in SYSTEMS and not rotation_allowed(panel.system):
        problems.append(
            Problem(
                f"a feeder landing other than A→A, B→B, C→C needs a three-phase panel without a high leg; "
                f"{panel.tag} is {panel.system}",
                panel.tag,
                field="feeder_rotation",
            )
        )
    taken: dict[int, int] = {}
    for c in panel.circuits:
        check_circuit_fits(panel, c, problems)
        for s in breaker_slots(c.slot, c.poles) if not c.is_space else (c.slot,):
            if s in taken:
                other = taken[s]
                problems.append(
                    Problem(
                        f"the breakers at slots {other} and {c.slot} overlap at slot {s}",
                        panel.tag,
                        c.slot,
                        "slot",
                    )
                )
            else:
                taken[s] = c.slot


def _parse_transformer(raw: Any, problems: list[Problem], index: int) -> Transformer | None:
    tag_value = raw.get("tag") if isinstance(raw, Mapping) else None
    tag = tag_value.strip() if isinstance(tag_value, str) else None
    r = _Reader(raw, problems, tag=tag, prefix="" if tag else f"transformers[{index}].")
    if not tag:
        r.text("tag", required=True)
        return None
    t = Transformer(
        tag=tag,
        kva=r.number("kva", 0.0, minimum=0.0, exclusive_min=True, maximum=100_000.0, required=True) or 0.0,
        primary=r.system("primary"),
        secondary=r.system("secondary"),
        impedance_pct=r.number("impedance_pct", 5.0, minimum=0.0, exclusive_min=True, maximum=30.0) or 5.0,
        x_over_r=r.number("x_over_r", None, minimum=0.0, exclusive_min=True, maximum=1000.0),
        fed_from=r.opt_text("fed_from"),
        feeder=_parse_feeder(r.data.get("feeder"), problems, tag),
        loss_pct=r.number("loss_pct", 0.0, minimum=0.0, maximum=20.0) or 0.0,
        k_factor=r.integer("k_factor", None, minimum=1, maximum=50),
        description=r.text("description"),
        location=r.text("location"),
    )
    pri, sec = SYSTEMS.get(t.primary), SYSTEMS.get(t.secondary)
    if pri and sec and len(sec.phases) == 3 and len(pri.phases) < 3:
        r.add("primary", "a three-phase secondary needs a three-phase primary")
    return t


def _parse_source(raw: Any, problems: list[Problem], index: int) -> Source | None:
    tag_value = raw.get("tag") if isinstance(raw, Mapping) else None
    tag = tag_value.strip() if isinstance(tag_value, str) else None
    r = _Reader(raw, problems, tag=tag, prefix="" if tag else f"sources[{index}].")
    if not tag:
        r.text("tag", required=True)
        return None
    return Source(
        tag=tag,
        system=r.system("system"),
        fault_ka=r.number("fault_ka", None, minimum=0.0, exclusive_min=True, maximum=1000.0),
        x_over_r=r.number("x_over_r", None, minimum=0.0, exclusive_min=True, maximum=1000.0),
        description=r.text("description"),
    )


def _parse_info(raw: Any, problems: list[Problem]) -> ProjectInfo:
    r = _Reader(raw, problems, prefix="project.")
    return ProjectInfo(
        name=r.text("name", required=True, max_len=200),
        number=r.text("number", max_len=50),
        code=r.choice("code", CodeEdition, CodeEdition.NEC_2023) or CodeEdition.NEC_2023,
        occupancy=r.choice("occupancy", Occupancy, Occupancy.OFFICE) or Occupancy.OFFICE,
        include_future=bool(r.boolean("include_future", False)),
        vd_feeder_pct=r.number("vd_feeder_pct", 3.0, minimum=0.0, exclusive_min=True, maximum=50.0) or 3.0,
        vd_total_pct=r.number("vd_total_pct", 5.0, minimum=0.0, exclusive_min=True, maximum=50.0) or 5.0,
        imbalance_limit_pct=r.number("imbalance_limit_pct", 10.0, minimum=0.0, exclusive_min=True, maximum=100.0)
        or 10.0,
        growth_margin_pct=r.number("growth_margin_pct", 25.0, minimum=0.0, maximum=500.0) or 0.0,
        area_ft2=r.number("area_ft2", None, minimum=0.0, exclusive_min=True, maximum=1e8),
        firm=r.text("firm", max_len=200),
        client=r.text("client", max_len=200),
        address=r.text("address", max_len=300),
        drawn_by=r.text("drawn_by", max_len=20),
        checked_by=r.text("checked_by", max_len=20),
        paper=_paper(r),
    )


PAPERS = ("letter-portrait", "letter-landscape", "tabloid-portrait", "tabloid-landscape")


def _paper(r: _Reader) -> str:
    value = r.text("paper", "tabloid-landscape") or "tabloid-landscape"
    if value not in PAPERS:
        r.add("paper", f"{value!r} is not one of " + ", ".join(PAPERS))
        return "tabloid-landscape"
    return value


def _list(data: Mapping[str, Any], name: str, problems: list[Problem]) -> list[Any]:
    value = data.get(name)
    if value is None:
        return []
    if not isinstance(value, list):
        problems.append(Problem("must be a list", field=name))
        return []
    return value


def parse_project(data: Any, *, source: str | None = None) -> Project:
    """Parse and validate a version-1 project file already loaded from JSON.

    Raises :class:`ProjectFileError` listing every problem found (not just the first).
    """
    problems: list[Problem] = []
    if not isinstance(data, Mapping):
        raise ProjectFileError([Problem("the project file must be a JSON object")], source=source)
    if data.get("format") != FORMAT_NAME:
        problems.append(Problem(f"must be {FORMAT_NAME!r}", field="format"))
    if data.get("version") != FORMAT_VERSION:
        problems.append(
            Problem(f"version {data.get('version')!r} is not supported; this reads version 1", field="version")
        )
        raise ProjectFileError(problems, source=source)
    info = _parse_info(data.get("project"), problems)
    sources = [s for i, raw in enumerate(_list(data, "sources", problems)) if (s := _parse_source(raw, problems, i))]
    transformers = [
        t for i, raw in enumerate(_list(data, "transformers", problems)) if (t := _parse_transformer(raw, problems, i))
    ]
    panels = [p for i, raw in enumerate(_list(data, "panels", problems)) if (p := _parse_panel(raw, problems, i))]
    project = Project(info, tuple(sources), tuple(transformers), tuple(panels))
    check_topology(project, problems)
    if problems:
        raise ProjectFileError(problems, source=source)
    return project


def check_topology(project: Project, problems: list[Problem]) -> None:
    """Tags unique; every element fed exactly once; systems match; no loops."""
    kinds: dict[str, str] = {}
    for kind, items in (("source", project.sources), ("transformer", project.transformers), ("panel", project.panels)):
        for item in items:
            if item.tag in kinds:
                problems.append(
                    Problem(f"duplicate tag (already used by a {kinds[item.tag]})", tag=item.tag, field="tag")
                )
            else:
                kinds[item.tag] = kind

    fed_by: dict[str, tuple[str, int]] = {}  # child tag -> (panel tag, slot)
    for panel in project.panels:
        for c in panel.circuits:
            if c.feeds is None:
                continue
            target = kinds.get(c.feeds)
            if target is None:
                problems.append(
                    Problem(
                        f"feeds {c.feeds!r}, which is not a panel or transformer in this project",
                        panel.tag,
                        c.slot,
                        "feeds",
                    )
                )
                continue
            if target == "source":
                problems.append(
                    Problem(
                        f"feeds {c.feeds!r}, which is a source; sources feed, they are not fed",
                        panel.tag,
                        c.slot,
                        "feeds",
                    )
                )
                continue
            if c.feeds == panel.tag:
                problems.append(Problem("a panel cannot feed itself", panel.tag, c.slot, "feeds"))
                continue
            if c.feeds in fed_by:
                other_panel, other_slot = fed_by[c.feeds]
                problems.append(
                    Problem(
                        f"{c.feeds} is fed twice: from {other_panel} slot {other_slot} and from {panel.tag} slot {c.slot}",
                        panel.tag,
                        c.slot,
                        "feeds",
                    )
                )
                continue
            fed_by[c.feeds] = (panel.tag, c.slot)

    parent: dict[str, str] = {}
    for element in (*project.transformers, *project.panels):
        via = fed_by.get(element.tag)
        if via is not None:
            parent[element.tag] = via[0]
            if element.fed_from is not None and element.fed_from != via[0]:
                problems.append(
                    Problem(
                        f"fed_from names {element.fed_from}, but it is fed from {via[0]} slot {via[1]}",
                        element.tag,
                        field="fed_from",
                    )
                )
            continue
        if element.fed_from is None:
            problems.append(
                Problem("is not fed from anything: give fed_from or a feeds circuit", element.tag, field="fed_from")
            )
            continue
        up_kind = kinds.get(element.fed_from)
        if up_kind is None:
            problems.append(
                Problem(
                    f"fed_from names {element.fed_from!r}, which is not in this project", element.tag, field="fed_from"
                )
            )
            continue
        if up_kind == "panel":
            problems.append(
                Problem(
                    f"fed_from names panel {element.fed_from}, but no circuit of {element.fed_from} feeds {element.tag}",
                    element.tag,
                    field="fed_from",
                )
            )
            continue
        if isinstance(element, Transformer) and up_kind == "transformer":
            problems.append(
                Problem(
                    f"a transformer cannot be fed straight from transformer {element.fed_from}",
                    element.tag,
                    field="fed_from",
                )
            )
            continue
        parent[element.tag] = element.fed_from

    # System agreement between each element and what feeds it.
    for element in (*project.transformers, *project.panels):
        up = parent.get(element.tag)
        if up is None:
            continue
        up_system = _output_system(project, up)
        if up_system is None:
            continue
        if isinstance(element, Panel):
            if element.feeder_rotation and rotation_allowed(element.system) and not rotation_allowed(up_system):
                problems.append(
                    Problem(
                        f"a feeder landing other than A→A, B→B, C→C needs a three-phase feeding system without "
                        f"a high leg; {up} is {up_system}",
                        element.tag,
                        field="feeder_rotation",
                    )
                )
            if element.system and element.system != up_system:
                problems.append(
                    Problem(
                        f"system {element.system} does not match {up_system} of {up}, which feeds it",
                        element.tag,
                        field="system",
                    )
                )
        else:
            pri, upspec = SYSTEMS.get(element.primary), SYSTEMS.get(up_system)
            if pri and upspec and len(pri.phases) == 3 and len(upspec.phases) < 3:
                problems.append(
                    Problem(
                        f"a three-phase primary ({element.primary}) cannot be fed from {up_system} of {up}",
                        element.tag,
                        field="primary",
                    )
                )
            elif pri and upspec and abs(pri.v_ll - upspec.v_ll) > 0.5:
                problems.append(
                    Problem(
                        f"primary {element.primary} does not match {up_system} of {up}, which feeds it",
                        element.tag,
                        field="primary",
                    )
                )
        via = fed_by.get(element.tag)
        if via is not None:
            feeding_panel = project.panel(via[0])
            breaker = feeding_panel.circuit_at(via[1]) if feeding_panel else None
            if breaker is not None:
                _check_feeding_poles(element, breaker, via[0], problems)

    # Loops.
    for start in parent:
        seen = [start]
        node = parent.get(start)
        while node is not None:
            if node == start:
                problems.append(Problem("feed loop: " + " → ".join([*reversed(seen), start]), start, field="fed_from"))
                break
            if node in seen:
                break
            seen.append(node)
            node = parent.get(node)


def _check_feeding_poles(
    element: Panel | Transformer, breaker: Circuit, panel_tag: str, problems: list[Problem]
) -> None:
    if isinstance(element, Panel):
        spec = SYSTEMS.get(element.system)
        need = len(spec.phases) if spec else None
        what = f"panel {element.tag} ({element.system})"
    else:
        sec = SYSTEMS.get(element.secondary)
        need = 3 if sec and len(sec.phases) == 3 else 2
        what = f"transformer {element.tag}"
        if sec and sec.kind == SystemKind.SINGLE:
            need = None  # a 2-wire secondary may sit on 1 or 2 poles
    if need is not None and breaker.poles != need:
        problems.append(
            Problem(
                f"a {breaker.poles}-pole breaker cannot feed {what}: it needs {need} poles",
                panel_tag,
                breaker.slot,
                "poles",
            )
        )


def _output_system(project: Project, tag: str) -> str | None:
    for s in project.sources:
        if s.tag == tag:
            return s.system
    for t in project.transformers:
        if t.tag == tag:
            return t.secondary
    for p in project.panels:
        if p.tag == tag:
            return p.system
    return None


# --------------------------------------------------------------------------- writing


def _plain(value: Any) -> Any:
    if isinstance(value, StrEnum):
        return value.value
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return int(value)
    if isinstance(value, tuple):
        return [_plain(v) for v in value]
    if hasattr(value, "__dataclass_fields__"):
        return {f.name: _plain(getattr(value, f.name)) for f in fields(value)}
    return value


def _plain_panel(panel: Panel) -> dict[str, Any]:
    out = _plain(panel)
    if not panel.feeder_rotation:
        del out["feeder_rotation"]  # optional: files written before the field existed round-trip unchanged
    return out


def dump_project(project: Project) -> dict[str, Any]:
    """The canonical version-1 JSON object of a project (every field written, nulls included;
    the one exception is a panel's ``feeder_rotation``, written only when not 0)."""
    return {
        "format": FORMAT_NAME,
        "version": FORMAT_VERSION,
        "project": _plain(project.project),
        "sources": [_plain(s) for s in project.sources],
        "transformers": [_plain(t) for t in project.transformers],
        "panels": [_plain_panel(p) for p in project.panels],
    }


def dumps_project(project: Project) -> str:
    return json.dumps(dump_project(project), indent=2, ensure_ascii=False) + "\n"


def load_project_file(path: str | Path) -> Project:
    """Read and validate a project file; every failure is a :class:`ProjectFileError` naming the file."""
    p = Path(path)
    name = str(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ProjectFileError([Problem("no such file")], source=name) from None
    except IsADirectoryError:
        raise ProjectFileError([Problem("is a directory, not a project file")], source=name) from None
    except UnicodeDecodeError:
        raise ProjectFileError([Problem("is not UTF-8 text; a project file is JSON")], source=name) from None
    except OSError as exc:
        raise ProjectFileError([Problem(f"cannot be read ({exc.strerror})")], source=name) from None
    return loads_project(text, source=name)


def loads_project(text: str, *, source: str | None = None) -> Project:
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ProjectFileError(
            [Problem(f"is not valid JSON: {exc.msg} at line {exc.lineno}, column {exc.colno}")], source=source
        ) from None
    return parse_project(data, source=source)


def replace_panel(project: Project, panel: Panel) -> Project:
    """A copy of ``project`` with the panel of the same tag replaced."""
    return project.with_panel(panel)


ProblemSink = Callable[[Problem], None]
