"""``panelwright calc``: the readable report, the JSON result, and clean failures on bad input."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from server.cli import cli
from server.commands import CAUTION

ROOT = Path(__file__).resolve().parents[2]
SMALL = ROOT / "tests" / "unit" / "calc" / "data" / "small_project.json"


def _run(*args: str):
    return CliRunner().invoke(cli, ["calc", *args], catch_exceptions=False)


def test_report_has_caution_edition_and_every_element() -> None:
    r = _run(str(SMALL))
    assert r.exit_code == 0, r.output
    assert CAUTION in r.output
    assert "NEC-2023" in r.output
    for tag in ("UTIL", "MDP", "T1", "LP-1", "LP-2"):
        assert tag in r.output
    assert "bus-overload" in r.output  # LP-2's 60.4 A on a 50 A bus


def test_json_output_and_include_future() -> None:
    r = _run(str(SMALL), "--json")
    assert r.exit_code == 0
    data = json.loads(r.stdout)
    assert data["panels"]["LP-2"]["connected_va_total"] == 18000
    assert data["include_future"] is False
    r = _run(str(SMALL), "--json", "--include-future")
    data = json.loads(r.stdout)
    assert data["panels"]["LP-2"]["connected_va_total"] == 20000
    assert data["include_future"] is True


def _bad_file(tmp_path: Path, mutate) -> Path:
    data = json.loads(SMALL.read_text())
    mutate(data)
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(data))
    return path


def _overlap(data) -> None:
    data["panels"][1]["circuits"].append({"slot": 12, "poles": 1, "va": 100})  # the 3P motor at 10 takes 10, 12, 14


@pytest.mark.parametrize(
    ("mutate", "expected"),
    [
        (_overlap, ["bad.json", "LP-1", "slot 12", "overlap"]),
        (lambda d: d["panels"][2]["circuits"][0].update(pf=1.5), ["LP-2", "slot 1", "pf"]),
        (lambda d: d["panels"][0].update(system="208 3PH"), ["MDP", "system", "unknown system"]),
        (lambda d: d["panels"][1]["circuits"][-1].update(feeds="NOPE"), ["LP-1", "slot 13", "feeds", "NOPE"]),
    ],
)
def test_bad_input_exits_2_naming_file_tag_slot_field(tmp_path: Path, mutate, expected) -> None:
    path = _bad_file(tmp_path, mutate)
    r = _run(str(path))
    assert r.exit_code == 2
    for word in expected:
        assert word in r.stderr, (word, r.stderr)
    assert "Traceback" not in r.stderr and r.stdout == ""


def test_missing_and_malformed_files(tmp_path: Path) -> None:
    r = _run(str(tmp_path / "none.json"))
    assert r.exit_code == 2 and "none.json" in r.stderr and "no such file" in r.stderr
    broken = tmp_path / "broken.json"
    broken.write_text('{"format": "panelwright.project", ')
    r = _run(str(broken))
    assert r.exit_code == 2 and "broken.json" in r.stderr and "not valid JSON" in r.stderr


def test_subprocess_bad_input_has_no_traceback(tmp_path: Path) -> None:
    path = _bad_file(tmp_path, lambda d: d["panels"][2]["circuits"][0].update(va=-5))
    proc = subprocess.run(
        [sys.executable, "-m", "server.cli", "calc", str(path)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert proc.returncode == 2
    assert "LP-2" in proc.stderr and "slot 1" in proc.stderr and "va" in proc.stderr
    assert "Traceback" not in proc.stderr
    ok = subprocess.run(
        [sys.executable, "-m", "server.cli", "calc", str(SMALL), "--json"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert ok.returncode == 0
    assert json.loads(ok.stdout)["transformers"]["T1"]["suggested_kva"] == 75
    assert CAUTION in ok.stderr


def test_demo_project_reports_every_element() -> None:
    from server.calc.projectfile import load_project_file
    from tests.helpers import DEMO_FILE

    project = load_project_file(DEMO_FILE)
    r = _run(str(DEMO_FILE))
    assert r.exit_code == 0
    for element in (*project.sources, *project.transformers, *project.panels):
        assert f" {element.tag} " in r.output, element.tag
    assert r.output.count(CAUTION) == 2  # at the head and at the foot of the report


def test_report_shows_a_feeder_landing_other_than_as_labelled(tmp_path: Path) -> None:
    data = json.loads(SMALL.read_text())
    for p in data["panels"]:
        if p["tag"] == "LP-1":  # three-phase, fed from a 208Y/120 transformer secondary
            p["feeder_rotation"] = 1
    path = tmp_path / "rotated.json"
    path.write_text(json.dumps(data))
    r = _run(str(path))
    assert r.exit_code == 0, r.output
    block = r.output.split("PANEL LP-1", 1)[1].split("PANEL ", 1)[0]
    assert "landing       A→B, B→C, C→A" in block
    assert "landing" not in r.output.split("PANEL LP-2", 1)[1].split("PANEL ", 1)[0]
