"""Frozen input model of the version-1 project file.

These dataclasses are the single contract between the store, the engine, import/export and
the CLI.  They hold what the file says; ``None`` means "not given" and is resolved by the
``effective_*`` helpers (defaults documented beside each).  Parsing and validation of raw
JSON lives in :mod:`server.calc.projectfile`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import StrEnum
from functools import cached_property

FORMAT_NAME = "panelwright.project"
FORMAT_VERSION = 1


class Category(StrEnum):
    """Load category of a circuit; each has its own NEC Article 220 demand rule."""

    LIGHTING = "lighting"
    RECEPTACLE = "receptacle"
    MOTOR = "motor"
    COOLING = "cooling"
    HEATING = "heating"
    KITCHEN = "kitchen"
    EV_CHARGING = "ev_charging"
    EQUIPMENT = "equipment"
    SPARE = "spare"


class Status(StrEnum):
    """Life-cycle status of a circuit."""

    EXISTING = "existing"
    NEW = "new"
    FUTURE = "future"  # counts only when the calculation is asked to include future loads
    REMOVED = "removed"  # never counts


class Occupancy(StrEnum):
    OFFICE = "office"
    RETAIL = "retail"
    SCHOOL = "school"
    RESTAURANT = "restaurant"
    HOSPITAL = "hospital"
    HOTEL = "hotel"
    WAREHOUSE = "warehouse"
    DWELLING = "dwelling"
    INDUSTRIAL = "industrial"
    OTHER = "other"


class CodeEdition(StrEnum):
    NEC_2023 = "NEC-2023"
    NEC_2020 = "NEC-2020"
    NEC_2017 = "NEC-2017"

    @property
    def year(self) -> int:
        return int(self.value[-4:])


class Material(StrEnum):
    CU = "Cu"
    AL = "Al"


class Conduit(StrEnum):
    """Raceway material, which sets R and X in NFPA 70 Chapter 9 Table 9."""

    STEEL = "steel"
    ALUMINUM = "aluminum"
    PVC = "pvc"


#: Default power factor by category.  Common practice for early design when the nameplate is
#: not yet known: resistive heating is unity; induction motors and packaged cooling run near
#: 0.85 lagging at load; electronic and mixed loads (lighting drivers, receptacles, kitchen,
#: EV chargers, equipment) near 0.9.
DEFAULT_PF: dict[Category, float] = {
    Category.HEATING: 1.0,
    Category.MOTOR: 0.85,
    Category.COOLING: 0.85,
}
DEFAULT_PF_OTHER = 0.9

#: Categories continuous by default (load expected on for 3 h or more, NFPA 70 Art. 100
#: "Continuous Load"): general lighting, fixed space heating (NEC 424.4(B)) and EV charging
#: (NEC 625.42 treats EVSE as continuous).
CONTINUOUS_BY_DEFAULT: frozenset[Category] = frozenset({Category.LIGHTING, Category.HEATING, Category.EV_CHARGING})


@dataclass(frozen=True)
class Feeder:
    """Conductors feeding an element.  Fields left ``None`` are chosen by the engine."""

    length_ft: float = 0.0
    material: Material = Material.CU
    conduit: Conduit = Conduit.STEEL
    sets: int | None = None  # parallel sets; None = engine chooses
    size: str | None = None  # phase conductor size ("3/0", "250"); None = engine chooses
    insulation_c: int = 75  # temperature column of Table 310.16 used for ampacity (60/75/90)
    ambient_c: float = 30.0
    terminal_c: int = 75  # terminal temperature rating (NEC 110.14(C)); 60 °C option
    ocpd_amps: int | None = None  # feeder breaker; None = engine chooses (or the feeding breaker's rating)
    egc: str | None = None
    neutral_size: str | None = None


@dataclass(frozen=True)
class Circuit:
    """One breaker (or space) on a panelboard."""

    slot: int
    poles: int = 1  # 0 = space (no breaker)
    description: str = ""
    category: Category | None = None
    va: float | None = None  # total apparent power; computed (never typed) when ``feeds`` is set
    pf: float | None = None
    continuous: bool | None = None
    breaker_amps: int | None = None
    status: Status = Status.NEW
    harmonic3_pct: float = 0.0
    feeds: str | None = None
    locked: bool = False  # the phase balancer never moves it
    notes: str = ""

    @property
    def is_space(self) -> bool:
        return self.poles == 0

    @property
    def effective_category(self) -> Category:
        return self.category or Category.EQUIPMENT

    @property
    def effective_pf(self) -> float:
        if self.pf is not None:
            return self.pf
        return DEFAULT_PF.get(self.effective_category, DEFAULT_PF_OTHER)

    @property
    def effective_continuous(self) -> bool:
        if self.continuous is not None:
            return self.continuous
        return self.effective_category in CONTINUOUS_BY_DEFAULT

    def counts(self, include_future: bool) -> bool:
        """Whether the circuit's load counts in a calculation."""
        if self.status == Status.REMOVED:
            return False
        if self.status == Status.FUTURE:
            return include_future
        return True


@dataclass(frozen=True)
class Panel:
    """A panelboard or switchboard."""

    tag: str
    system: str
    fed_from: str | None = None
    bus_amps: int = 225
    main_amps: int | None = None  # None = main lugs only
    spaces: int = 42
    sccr_ka: float | None = None
    feeder: Feeder = field(default_factory=Feeder)
    circuits: tuple[Circuit, ...] = ()
    description: str = ""
    location: str = ""
    mounting: str = ""
    #: Installer's landing of the panel's feeder conductors, relative to the panel feeding it: a
    #: cyclic rotation r lands the panel's phase index i on upstream phase index (i + r) % 3
    #: (r=1: A→B, B→C, C→A; r=2: A→C, B→A, C→B).  0 = as labelled.  Only on a three-phase
    #: panel without a high leg (checked in projectfile).
    feeder_rotation: int = 0

    def circuit_at(self, slot: int) -> Circuit | None:
        for c in self.circuits:
            if c.slot == slot:
                return c
        return None


@dataclass(frozen=True)
class Transformer:
    """A step-down (or isolation) transformer."""

    tag: str
    kva: float
    primary: str
    secondary: str
    impedance_pct: float = 5.0
    x_over_r: float | None = None  # None = purely reactive
    fed_from: str | None = None
    feeder: Feeder = field(default_factory=Feeder)  # primary conductors from the feeding breaker
    loss_pct: float = 0.0
    k_factor: int | None = None
    description: str = ""
    location: str = ""


@dataclass(frozen=True)
class Source:
    """A utility service or generator: the root of a distribution tree."""

    tag: str
    system: str
    fault_ka: float | None = None  # None = infinite bus
    x_over_r: float | None = None  # None = purely reactive
    description: str = ""


@dataclass(frozen=True)
class ProjectInfo:
    """Project header and settings.  Title-block fields are free text."""

    name: str
    number: str = ""
    code: CodeEdition = CodeEdition.NEC_2023
    occupancy: Occupancy = Occupancy.OFFICE
    include_future: bool = False
    vd_feeder_pct: float = 3.0  # NEC 215.2(A)(2) Informational Note No. 2 recommendation
    vd_total_pct: float = 5.0  # same note: feeder plus branch circuit
    imbalance_limit_pct: float = 10.0  # common practice threshold for a warning
    growth_margin_pct: float = 25.0  # spare capacity added before choosing a transformer size
    area_ft2: float | None = None  # for lighting unit-load estimates
    firm: str = ""
    client: str = ""
    address: str = ""
    drawn_by: str = ""
    checked_by: str = ""
    paper: str = "tabloid-landscape"


@dataclass(frozen=True)
class Project:
    """A whole project: header, sources, transformers and panels."""

    project: ProjectInfo
    sources: tuple[Source, ...] = ()
    transformers: tuple[Transformer, ...] = ()
    panels: tuple[Panel, ...] = ()

    # Lookups by tag go through an index built on first use (a project is immutable, and every
    # edit makes a new one); the first element wins if a not-yet-validated file repeats a tag.

    @cached_property
    def _by_tag(self) -> tuple[dict[str, Source], dict[str, Transformer], dict[str, Panel], dict[str, int] | None]:
        """Sources, transformers and panels by tag, and each panel's position (None when a tag repeats)."""
        sources: dict[str, Source] = {}
        transformers: dict[str, Transformer] = {}
        panels: dict[str, Panel] = {}
        for s in self.sources:
            sources.setdefault(s.tag, s)
        for t in self.transformers:
            transformers.setdefault(t.tag, t)
        for p in self.panels:
            panels.setdefault(p.tag, p)
        positions = {p.tag: i for i, p in enumerate(self.panels)} if len(panels) == len(self.panels) else None
        return sources, transformers, panels, positions

    def panel(self, tag: str) -> Panel | None:
        return self._by_tag[2].get(tag)

    def with_panel(self, panel: Panel) -> Project:
        """A copy with the panel of the same tag replaced.  With the index built (an edit's path),
        the new panel tuple is spliced at the known position and the index carried over with one
        entry changed: no pass over every panel."""
        index = self.__dict__.get("_by_tag")
        i = index[3].get(panel.tag) if index is not None and index[3] is not None else None
        if i is None:
            return Project(
                self.project,
                self.sources,
                self.transformers,
                tuple(panel if p.tag == panel.tag else p for p in self.panels),
            )
        new = Project(self.project, self.sources, self.transformers, (*self.panels[:i], panel, *self.panels[i + 1 :]))
        new.__dict__["_by_tag"] = (index[0], index[1], {**index[2], panel.tag: panel}, index[3])
        return new

    def transformer(self, tag: str) -> Transformer | None:
        return self._by_tag[1].get(tag)

    def source(self, tag: str) -> Source | None:
        return self._by_tag[0].get(tag)


@dataclass(frozen=True)
class CalcOptions:
    """Options of one calculation run."""

    include_future: bool | None = None  # None = the project's setting
