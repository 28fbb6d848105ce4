"""The committed JSON Schema of the project file is current, and real files validate against it."""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest

from server.calc.projectfile import dump_project, load_project_file
from server.schema import SCHEMA_PATH, project_schema, schema_text
from tests.benchmarks.generate import generate_project
from tests.helpers import DEMO_FILE

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = [DEMO_FILE, ROOT / "tests" / "unit" / "calc" / "data" / "small_project.json"]


@pytest.fixture(scope="module")
def validator() -> jsonschema.Draft202012Validator:
    schema = json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


def test_committed_schema_is_up_to_date() -> None:
    assert SCHEMA_PATH.read_text(encoding="utf-8") == schema_text(), (
        "docs/project-v1.schema.json is stale: run `.venv/bin/python -m server.schema --write`"
    )


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.name)
def test_sample_files_validate(validator, path: Path) -> None:
    data = json.loads(path.read_text(encoding="utf-8"))
    assert not [e.message for e in validator.iter_errors(data)]
    # ... and so does their canonical rewrite (every field, nulls included).
    assert not [e.message for e in validator.iter_errors(dump_project(load_project_file(path)))]


def test_generated_project_validates(validator) -> None:
    assert not [
        e.message
        for e in validator.iter_errors(
            dump_project(generate_project(panels=30, sources=1, transformers_per_mdp=3, panels_per_transformer=2))
        )
    ]


@pytest.mark.parametrize(
    ("path", "value"),
    [
        (("panels", 0, "circuits", 0, "pf"), 1.5),
        (("panels", 0, "system"), "208 3PH"),
        (("panels", 0, "circuits", 0, "poles"), 4),
        (("panels", 0, "feeder", "size"), "5/0"),
        (("version",), 2),
    ],
)
def test_schema_refuses_what_the_parser_refuses(validator, path, value) -> None:
    data = json.loads(SAMPLES[1].read_text(encoding="utf-8"))
    target = data
    for key in path[:-1]:
        target = target.setdefault(key, {}) if isinstance(key, str) else target[key]
    target[path[-1]] = value
    assert list(validator.iter_errors(data))


def test_schema_lists_every_system() -> None:
    from server.calc.systems import SYSTEMS

    panel = project_schema()["$defs"]["Panel"]["properties"]["system"]
    assert panel["enum"] == list(SYSTEMS)


def test_cli_prints_and_writes_the_schema(tmp_path: Path) -> None:
    from click.testing import CliRunner

    from server.cli import cli

    r = CliRunner().invoke(cli, ["schema"])
    assert r.exit_code == 0 and json.loads(r.stdout) == project_schema()
    out = tmp_path / "s.json"
    r = CliRunner().invoke(cli, ["schema", "--out", str(out)])
    assert r.exit_code == 0 and out.read_text(encoding="utf-8") == schema_text()
    r = CliRunner().invoke(cli, ["schema", "--out", str(tmp_path / "missing-dir" / "s.json")])
    assert r.exit_code == 2 and "cannot write" in r.stderr
