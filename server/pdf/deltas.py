"""Revision deltas: what changed between the previous issued project file and the current one.

Pure: works on version-1 project dicts (canonical, as written by
:func:`server.calc.projectfile.dump_project`) and, for computed values, on the dicts of
*printed* values the sheets show (:func:`server.pdf.sheets.printed_values`).  Comparing the
printed text rather than raw floats means a delta marker appears exactly when what the
reader sees on the sheet changed, never for a change below the printed precision.

Keys:

* circuits — ``(panel tag, slot)`` of every slot whose circuit was added, removed or edited,
  or whose computed load (a ``feeds`` circuit) prints differently;
* values — ``(element tag, key)`` of panel / transformer values that print differently
  (keys such as ``"demand_va"``, ``"phase_va.A"``, ``"feeder.conductor"``, ``"bus_amps"``);
* new_elements — tags present now and absent from the previous file (the whole sheet is new).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

#: Panel input fields printed in the panel data block; a change marks that field.
PANEL_FIELDS: tuple[str, ...] = (
    "system",
    "feeder_rotation",
    "fed_from",
    "bus_amps",
    "main_amps",
    "spaces",
    "sccr_ka",
    "description",
    "location",
    "mounting",
)
TRANSFORMER_FIELDS: tuple[str, ...] = (
    "kva",
    "primary",
    "secondary",
    "impedance_pct",
    "x_over_r",
    "fed_from",
    "loss_pct",
    "k_factor",
    "description",
    "location",
)

PrintedValues = Mapping[str, Mapping[str, str]]  # element tag -> value key -> printed text


@dataclass(frozen=True)
class Deltas:
    """What changed since the previous issued revision (empty for a first issue or a draft)."""

    revision: int | None = None
    circuits: frozenset[tuple[str, int]] = field(default_factory=frozenset)
    values: frozenset[tuple[str, str]] = field(default_factory=frozenset)
    new_elements: frozenset[str] = field(default_factory=frozenset)

    def circuit(self, tag: str, slot: int) -> bool:
        return (tag, slot) in self.circuits

    def value(self, tag: str, key: str) -> bool:
        return (tag, key) in self.values

    def touches(self, tag: str) -> bool:
        """Whether anything on the element's sheet is marked."""
        if tag in self.new_elements:
            return True
        return any(t == tag for t, _ in self.circuits) or any(t == tag for t, _ in self.values)

    @property
    def empty(self) -> bool:
        return not (self.circuits or self.values or self.new_elements)


NO_DELTAS = Deltas()


def _by_tag(data: Mapping[str, Any], kind: str) -> dict[str, Mapping[str, Any]]:
    items = data.get(kind) or []
    return {str(item.get("tag")): item for item in items if isinstance(item, Mapping)}


def _circuits_by_slot(panel: Mapping[str, Any]) -> dict[int, Mapping[str, Any]]:
    out: dict[int, Mapping[str, Any]] = {}
    for c in panel.get("circuits") or []:
        if isinstance(c, Mapping) and isinstance(c.get("slot"), int):
            out[c["slot"]] = c
    return out


def _norm(value: Any) -> Any:
    """Equal numbers compare equal whether written 20 or 20.0."""
    if isinstance(value, float) and value.is_integer():
        return int(value)
    if isinstance(value, Mapping):
        return {k: _norm(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_norm(v) for v in value]
    return value


def _differs(a: Mapping[str, Any] | None, b: Mapping[str, Any] | None) -> bool:
    if a is None or b is None:
        return (a is None) != (b is None)
    return _norm(dict(a)) != _norm(dict(b))


def diff_projects(
    previous: Mapping[str, Any],
    current: Mapping[str, Any],
    *,
    previous_values: PrintedValues | None = None,
    current_values: PrintedValues | None = None,
    revision: int | None = None,
) -> Deltas:
    """Compare two version-1 project dicts (and optionally their printed values).

    Circuits are compared by their starting slot: a circuit added, removed or with any field
    changed marks that slot; a removed multi-pole breaker marks only its first slot (the row
    that printed its description).
    """
    circuits: set[tuple[str, int]] = set()
    values: set[tuple[str, str]] = set()
    new: set[str] = set()

    prev_panels, cur_panels = _by_tag(previous, "panels"), _by_tag(current, "panels")
    for tag, panel in cur_panels.items():
        old = prev_panels.get(tag)
        if old is None:
            new.add(tag)
            continue
        for name in PANEL_FIELDS:
            if _norm(old.get(name)) != _norm(panel.get(name)):
                values.add((tag, name))
        if _differs(old.get("feeder"), panel.get("feeder")):
            values.add((tag, "feeder"))
        old_c, cur_c = _circuits_by_slot(old), _circuits_by_slot(panel)
        for slot in old_c.keys() | cur_c.keys():
            if _differs(old_c.get(slot), cur_c.get(slot)):
                circuits.add((tag, slot))

    prev_tx, cur_tx = _by_tag(previous, "transformers"), _by_tag(current, "transformers")
    for tag, tx in cur_tx.items():
        old = prev_tx.get(tag)
        if old is None:
            new.add(tag)
            continue
        for name in TRANSFORMER_FIELDS:
            if _norm(old.get(name)) != _norm(tx.get(name)):
                values.add((tag, name))
        if _differs(old.get("feeder"), tx.get("feeder")):
            values.add((tag, "feeder"))

    prev_src, cur_src = _by_tag(previous, "sources"), _by_tag(current, "sources")
    for tag, src in cur_src.items():
        old = prev_src.get(tag)
        if old is None:
            new.add(tag)
        elif _differs(old, src):
            values.add((tag, "source"))

    if previous_values is not None and current_values is not None:
        for tag, printed in current_values.items():
            if tag in new:
                continue
            before = previous_values.get(tag)
            if before is None:
                continue
            for key, text in printed.items():
                if before.get(key) != text:
                    if key.startswith("circuit."):
                        circuits.add((tag, int(key.removeprefix("circuit."))))
                    else:
                        values.add((tag, key))

    return Deltas(
        revision=revision,
        circuits=frozenset(circuits),
        values=frozenset(values),
        new_elements=frozenset(new),
    )
