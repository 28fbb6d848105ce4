"""JSON Schema of the version-1 project file, generated from the model dataclasses.

The schema is derived with pydantic's ``TypeAdapter`` from :mod:`server.calc.model` (so it
cannot drift from the dataclasses), then tightened with the value rules that
:mod:`server.calc.projectfile` enforces (accepted system strings, conductor sizes, numeric
ranges).  It describes the canonical file that ``dump_project`` writes; the parser is a little
more forgiving (numbers given as text, "yes"/"no" for booleans).  It lives outside
``server.calc`` because pydantic is not part of the pure calculation layer.

``python -m server.schema`` prints it; ``python -m server.schema --write`` refreshes the
committed copy ``docs/project-v1.schema.json`` (a test checks that copy is up to date).
"""

from __future__ import annotations

import json
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

from pydantic import TypeAdapter

from server.calc.model import FORMAT_NAME, FORMAT_VERSION, Panel, ProjectInfo, Source, Transformer
from server.calc.projectfile import FEEDER_ROTATIONS, MAX_POLES, MAX_SPACES, PAPERS
from server.calc.systems import SYSTEMS
from server.calc.tables import conductor_sizes

SCHEMA_PATH = Path(__file__).resolve().parent.parent / "docs" / "project-v1.schema.json"
SCHEMA_ID = "https://panelwright.invalid/schema/project-v1.schema.json"


@dataclass
class ProjectFileV1:
    """A Panelwright project file, version 1."""

    format: Literal["panelwright.project"]
    version: Literal[1]
    project: ProjectInfo
    sources: list[Source] = field(default_factory=list)
    transformers: list[Transformer] = field(default_factory=list)
    panels: list[Panel] = field(default_factory=list)


# (definition, property) → extra keywords, mirroring the checks of server.calc.projectfile.
_NUMBER_RULES: dict[tuple[str, str], dict[str, Any]] = {
    ("Circuit", "slot"): {"minimum": 1, "maximum": MAX_SPACES},
    ("Circuit", "poles"): {"minimum": 0, "maximum": MAX_POLES},
    ("Circuit", "va"): {"minimum": 0, "maximum": 1e9},
    ("Circuit", "pf"): {"exclusiveMinimum": 0, "maximum": 1},
    ("Circuit", "breaker_amps"): {"minimum": 1, "maximum": 10_000},
    ("Circuit", "harmonic3_pct"): {"minimum": 0, "maximum": 300},
    ("Panel", "bus_amps"): {"minimum": 1, "maximum": 10_000},
    ("Panel", "main_amps"): {"minimum": 1, "maximum": 10_000},
    ("Panel", "spaces"): {"minimum": 1, "maximum": MAX_SPACES},
    ("Panel", "sccr_ka"): {"exclusiveMinimum": 0, "maximum": 1000},
    ("Feeder", "length_ft"): {"minimum": 0, "maximum": 100_000},
    ("Feeder", "sets"): {"minimum": 1, "maximum": 20},
    ("Feeder", "ambient_c"): {"minimum": -40, "maximum": 90},
    ("Feeder", "ocpd_amps"): {"minimum": 1, "maximum": 10_000},
    ("Transformer", "kva"): {"exclusiveMinimum": 0, "maximum": 100_000},
    ("Transformer", "impedance_pct"): {"exclusiveMinimum": 0, "maximum": 30},
    ("Transformer", "x_over_r"): {"exclusiveMinimum": 0, "maximum": 1000},
    ("Transformer", "loss_pct"): {"minimum": 0, "maximum": 20},
    ("Transformer", "k_factor"): {"minimum": 1, "maximum": 50},
    ("Source", "fault_ka"): {"exclusiveMinimum": 0, "maximum": 1000},
    ("Source", "x_over_r"): {"exclusiveMinimum": 0, "maximum": 1000},
    ("ProjectInfo", "vd_feeder_pct"): {"exclusiveMinimum": 0, "maximum": 50},
    ("ProjectInfo", "vd_total_pct"): {"exclusiveMinimum": 0, "maximum": 50},
    ("ProjectInfo", "imbalance_limit_pct"): {"exclusiveMinimum": 0, "maximum": 100},
    ("ProjectInfo", "growth_margin_pct"): {"minimum": 0, "maximum": 500},
    ("ProjectInfo", "area_ft2"): {"exclusiveMinimum": 0, "maximum": 1e8},
}
_ENUM_RULES: dict[tuple[str, str], list[Any]] = {
    ("Panel", "system"): list(SYSTEMS),
    ("Source", "system"): list(SYSTEMS),
    ("Transformer", "primary"): list(SYSTEMS),
    ("Transformer", "secondary"): list(SYSTEMS),
    ("Feeder", "size"): list(conductor_sizes()),
    ("Feeder", "egc"): list(conductor_sizes()),
    ("Feeder", "neutral_size"): list(conductor_sizes()),
    ("Feeder", "insulation_c"): [60, 75, 90],
    ("Feeder", "terminal_c"): [60, 75],
    ("ProjectInfo", "paper"): list(PAPERS),
    ("Panel", "feeder_rotation"): list(FEEDER_ROTATIONS),
}


def _apply(prop: dict[str, Any], rules: dict[str, Any]) -> None:
    """Add ``rules`` to the non-null branch of a property (``anyOf`` with null for optional ones)."""
    branches = prop.get("anyOf")
    if branches:
        for b in branches:
            if b.get("type") != "null":
                b.update(rules)
    else:
        prop.update(rules)


def project_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of the version-1 project file."""
    schema = TypeAdapter(ProjectFileV1).json_schema(mode="validation")
    defs = schema.get("$defs", {})
    for (name, prop), rules in _NUMBER_RULES.items():
        _apply(defs[name]["properties"][prop], rules)
    for (name, prop), values in _ENUM_RULES.items():
        _apply(defs[name]["properties"][prop], {"enum": values})
    props = schema["properties"]
    props["format"] = {"const": FORMAT_NAME, "title": "Format", "description": "Always 'panelwright.project'."}
    props["version"] = {"const": FORMAT_VERSION, "title": "Version", "description": "This schema describes version 1."}
    out: dict[str, Any] = {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": SCHEMA_ID,
        "title": "Panelwright project file, version 1",
        "description": (
            "Sources, transformers and panelboards with their circuits, as written by Panelwright. "
            "Generated from server/calc/model.py by server/schema.py; do not edit by hand."
        ),
    }
    out.update({k: v for k, v in schema.items() if k not in ("title", "description")})
    return out


def schema_text() -> str:
    return json.dumps(project_schema(), indent=2, ensure_ascii=False, sort_keys=False) + "\n"


def main(argv: list[str] | None = None) -> None:
    args = sys.argv[1:] if argv is None else argv
    if "--write" in args:
        SCHEMA_PATH.parent.mkdir(parents=True, exist_ok=True)
        SCHEMA_PATH.write_text(schema_text(), encoding="utf-8")
        print(SCHEMA_PATH)
    else:
        sys.stdout.write(schema_text())


if __name__ == "__main__":
    main()
