"""Frozen result objects of a calculation.

The same objects feed the HTML pages, the htmx fragments, the JSON API, the PDF set and the
CLI report: a number is computed once, in ``server.calc``, and only formatted elsewhere.
:func:`result_to_json` gives the JSON shape promised by ``panelwright calc --json``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import StrEnum
from typing import Any


class Severity(StrEnum):
    ERROR = "error"  # a code violation or an overload
    WARNING = "warning"  # needs the engineer's attention
    NOTE = "note"  # information


class WarningCode(StrEnum):
    """Stable warning codes.  Messages may change; codes do not."""

    BUS_OVERLOAD = "bus-overload"
    MAIN_OVERLOAD = "main-overload"
    FEEDER_AMPACITY = "feeder-ampacity"
    FEEDER_OCPD = "feeder-ocpd"
    CONDUCTOR_TOO_SMALL = "conductor-too-small"
    EGC_TOO_SMALL = "egc-too-small"
    IMBALANCE = "phase-imbalance"
    NEUTRAL_OVERLOAD = "neutral-overload"
    HIGH_LEG = "high-leg-misuse"
    SCCR_LOW = "sccr-below-fault"
    TRANSFORMER_OVERLOAD = "transformer-overload"
    SPACES_EXHAUSTED = "spaces-exhausted"
    VOLTAGE_DROP_FEEDER = "vdrop-feeder"
    VOLTAGE_DROP_TOTAL = "vdrop-total"
    BREAKER_UNDERSIZED = "breaker-undersized"
    NO_SIZE = "no-standard-size"


@dataclass(frozen=True)
class CalcWarning:
    code: WarningCode
    message: str
    tag: str
    slot: int | None = None
    severity: Severity = Severity.WARNING

    def to_json(self) -> dict[str, Any]:
        return {
            "code": self.code.value,
            "message": self.message,
            "tag": self.tag,
            "slot": self.slot,
            "severity": self.severity.value,
        }


@dataclass(frozen=True)
class CategoryDemand:
    """One step of the NEC Article 220 calculation at a node."""

    category: str
    connected_va: float
    demand_va: float
    rule: str  # code reference with edition, e.g. "NEC-2023 220.47 / Table 220.47"
    note: str = ""  # plain words: "first 10 kVA at 100 %, remainder at 50 %"

    @property
    def factor(self) -> float:
        return self.demand_va / self.connected_va if self.connected_va else 1.0


@dataclass(frozen=True)
class FeederResult:
    """The conductors and overcurrent device feeding a panel or transformer."""

    ocpd_amps: int
    conductor: str  # phase conductor size per set ("3/0", "250")
    material: str
    sets: int
    egc: str
    neutral: str | None
    ampacity_amps: float  # after correction and adjustment, all sets, limited by terminals
    design_amps: float
    length_ft: float
    conduit: str
    voltage_drop_pct: float
    cumulative_voltage_drop_pct: float
    size_given: bool = False  # the user typed the size (checked, never replaced)
    current_carrying: int = 3
    reason: str = ""  # why this size (ampacity, voltage drop, ...)

    def describe(self) -> str:
        sets = f"{self.sets}× " if self.sets > 1 else ""
        neutral = f", {self.neutral} N" if self.neutral else ""
        return f"{sets}{self.conductor} {self.material}{neutral}, {self.egc} EGC; {self.ocpd_amps} A OCPD"


@dataclass(frozen=True)
class CircuitResult:
    slot: int
    slots: tuple[int, ...]
    phases: tuple[str, ...]
    phase_va: dict[str, float]  # trade-convention VA on each of its phases
    amps: float  # magnitude of the load current (line current of the circuit)
    counted: bool  # False for removed (and future unless included)
    load_va: float  # total VA (computed for feeds circuits)


@dataclass(frozen=True)
class PanelResult:
    tag: str
    system: str
    connected_va: dict[str, float]
    connected_va_total: float
    connected_by_category: dict[str, float]
    demand_va: float
    demand_steps: tuple[CategoryDemand, ...]
    continuous_demand_va: float
    largest_motor_va: float
    line_amps: dict[str, float]
    line_amps_rms: dict[str, float]
    neutral_amps: float | None
    imbalance_pct: float
    design_amps: float
    feeder: FeederResult | None
    fault_ka: float | None
    fault_x_over_r: float | None
    capacity_amps: float  # the lesser of bus and main
    capacity_pct: float  # design amps as % of capacity_amps
    spaces_total: int
    spaces_used: int
    circuits: tuple[CircuitResult, ...]
    warnings: tuple[CalcWarning, ...]
    fed_from: str | None
    ancestors: tuple[str, ...]  # nearest first, up to the source

    def to_json(self) -> dict[str, Any]:
        f = self.feeder
        return {
            "system": self.system,
            "connected_va": _r(self.connected_va),
            "connected_va_total": _r(self.connected_va_total),
            "connected_by_category": _r(self.connected_by_category),
            "demand_va": _r(self.demand_va),
            "demand_steps": [
                {
                    "category": s.category,
                    "connected_va": _r(s.connected_va),
                    "demand_va": _r(s.demand_va),
                    "factor": round(s.factor, 4),
                    "rule": s.rule,
                    "note": s.note,
                }
                for s in self.demand_steps
            ],
            "line_amps": _r(self.line_amps),
            "line_amps_rms": _r(self.line_amps_rms),
            "neutral_amps": _r(self.neutral_amps),
            "imbalance_pct": _r(self.imbalance_pct),
            "design_amps": _r(self.design_amps),
            "feeder": None
            if f is None
            else {
                "ocpd_amps": f.ocpd_amps,
                "conductor": f.conductor,
                "material": f.material,
                "sets": f.sets,
                "egc": f.egc,
                "neutral": f.neutral,
                "ampacity_amps": _r(f.ampacity_amps),
                "length_ft": _r(f.length_ft),
                "voltage_drop_pct": _r(f.voltage_drop_pct),
                "cumulative_voltage_drop_pct": _r(f.cumulative_voltage_drop_pct),
                "size_given": f.size_given,
            },
            "fault_ka": _r(self.fault_ka),
            "capacity_pct": _r(self.capacity_pct),
            "spaces_used": self.spaces_used,
            "spaces_total": self.spaces_total,
            "fed_from": self.fed_from,
            "warnings": [w.to_json() for w in self.warnings],
        }


@dataclass(frozen=True)
class TransformerResult:
    tag: str
    kva: float
    primary: str
    secondary: str
    load_kva: float  # demand load of everything on the secondary (+ losses if given)
    connected_kva: float
    loading_pct: float
    fla_primary: float
    fla_secondary: float
    primary_line_amps: dict[str, float]  # phasor currents reflected through the windings
    secondary_line_amps: dict[str, float]
    secondary_fault_ka: float | None
    suggested_kva: float
    primary_ocpd_amps: int  # NEC 450.3(B), primary-only protection
    secondary_ocpd_amps: int  # NEC 450.3(B), primary-and-secondary protection: secondary device
    primary_ocpd_with_secondary_amps: int  # same option: the primary device (up to 250 %)
    k_factor_suggested: int | None
    feeder: FeederResult | None
    warnings: tuple[CalcWarning, ...]
    fed_from: str | None
    ancestors: tuple[str, ...]

    def to_json(self) -> dict[str, Any]:
        return {
            "kva": _r(self.kva),
            "primary": self.primary,
            "secondary": self.secondary,
            "load_kva": _r(self.load_kva),
            "connected_kva": _r(self.connected_kva),
            "loading_pct": _r(self.loading_pct),
            "fla_primary": _r(self.fla_primary),
            "fla_secondary": _r(self.fla_secondary),
            "primary_line_amps": _r(self.primary_line_amps),
            "secondary_line_amps": _r(self.secondary_line_amps),
            "secondary_fault_ka": _r(self.secondary_fault_ka),
            "suggested_kva": _r(self.suggested_kva),
            "primary_ocpd_amps": self.primary_ocpd_amps,
            "secondary_ocpd_amps": self.secondary_ocpd_amps,
            "primary_ocpd_with_secondary_amps": self.primary_ocpd_with_secondary_amps,
            "k_factor_suggested": self.k_factor_suggested,
            "feeder": None
            if self.feeder is None
            else {
                "ocpd_amps": self.feeder.ocpd_amps,
                "conductor": self.feeder.conductor,
                "material": self.feeder.material,
                "sets": self.feeder.sets,
                "egc": self.feeder.egc,
                "voltage_drop_pct": _r(self.feeder.voltage_drop_pct),
                "cumulative_voltage_drop_pct": _r(self.feeder.cumulative_voltage_drop_pct),
            },
            "fed_from": self.fed_from,
            "warnings": [w.to_json() for w in self.warnings],
        }


@dataclass(frozen=True)
class SourceResult:
    """A service: the load calculation summary of everything a source feeds."""

    tag: str
    system: str
    connected_va: float
    demand_va: float
    demand_steps: tuple[CategoryDemand, ...]
    design_amps: float
    line_amps: dict[str, float]
    fault_ka: float | None

    def to_json(self) -> dict[str, Any]:
        return {
            "system": self.system,
            "connected_va": _r(self.connected_va),
            "demand_va": _r(self.demand_va),
            "design_amps": _r(self.design_amps),
            "line_amps": _r(self.line_amps),
            "fault_ka": _r(self.fault_ka),
            "demand_steps": [
                {
                    "category": s.category,
                    "connected_va": _r(s.connected_va),
                    "demand_va": _r(s.demand_va),
                    "rule": s.rule,
                }
                for s in self.demand_steps
            ],
        }


@dataclass(frozen=True)
class ProjectResult:
    code: str
    include_future: bool
    panels: dict[str, PanelResult]
    transformers: dict[str, TransformerResult]
    sources: dict[str, SourceResult]
    warnings: tuple[CalcWarning, ...] = field(default=())

    def to_json(self) -> dict[str, Any]:
        return {
            "code": self.code,
            "include_future": self.include_future,
            "panels": {k: v.to_json() for k, v in self.panels.items()},
            "transformers": {k: v.to_json() for k, v in self.transformers.items()},
            "sources": {k: v.to_json() for k, v in self.sources.items()},
            "warnings": [w.to_json() for w in self.warnings],
        }


def _r(value: Any) -> Any:
    """Round for JSON: 3 decimals is finer than any table the numbers come from."""
    if value is None:
        return None
    if isinstance(value, dict):
        return {k: _r(v) for k, v in value.items()}
    if isinstance(value, float):
        return round(value, 3)
    return value
