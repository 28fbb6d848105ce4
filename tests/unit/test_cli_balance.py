"""``panelwright balance``: JSON keys, the report with the caution, --out re-validation, clean failures."""

from __future__ import annotations

import json
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import pytest
from click.testing import CliRunner

from server.calc.balance import Move, apply_moves, feeds_va_map, panel_loading
from server.calc.projectfile import load_project_file
from server.calc.systems import SYSTEMS
from server.cli import cli
from server.commands import CAUTION
from tests.helpers import DEMO_FILE, ROOT, assert_close


def _run(*args: str):
    return CliRunner().invoke(cli, ["balance", *args], catch_exceptions=False)


def _three_phase_panel() -> str:
    """The wye panel of the demo with the most 1-pole breakers (the one with most to balance)."""
    project = load_project_file(DEMO_FILE)
    wye = [p for p in project.panels if SYSTEMS[p.system].kind.value == "wye"]
    assert wye, "demo has no wye panel"
    return max(wye, key=lambda p: sum(c.poles == 1 for c in p.circuits)).tag


def test_json_keys_and_moves_reproduce_after() -> None:
    tag = _three_phase_panel()
    r = _run(str(DEMO_FILE), "--panel", tag, "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    for key in ("before", "after", "lower_bound_va", "gap_pct", "moves", "breaker_moves", "proven_optimal"):
        assert key in data
    for side in ("before", "after"):
        assert set(data[side]["phase_va"]) == {"A", "B", "C"}
        assert data[side]["neutral_amps"] is not None
    assert data["lower_bound_va"] <= data["after"]["max_phase_va"] + 0.1
    assert data["after"]["max_phase_va"] <= data["before"]["max_phase_va"] + 0.1
    # the listed moves, applied at once to the input panel, give the reported "after"
    project = load_project_file(DEMO_FILE)
    panel = project.panel(tag)
    moves = [Move(m["from_slot"], m["to_slot"]) for m in data["moves"]]
    future = project.project.include_future
    after = panel_loading(
        apply_moves(panel, moves), include_future=future, feeds_va=feeds_va_map(project, panel, future)
    )
    for phase, va in data["after"]["phase_va"].items():
        assert_close(after.phase_va[phase], va, rel=1e-6, abs_=0.06, what=f"phase {phase}")


def test_json_has_only_the_system_phases() -> None:
    project = load_project_file(DEMO_FILE)
    split = next((p for p in project.panels if SYSTEMS[p.system].kind.value == "split"), None)
    if split is None:
        pytest.skip("demo has no split-phase panel")
    data = json.loads(_run(str(DEMO_FILE), "--panel", split.tag, "--json").stdout)
    assert set(data["before"]["phase_va"]) == {"A", "B"}


def test_report_shows_table_and_caution() -> None:
    tag = _three_phase_panel()
    r = _run(str(DEMO_FILE), "--panel", tag)
    assert r.exit_code == 0, r.output
    assert f"BALANCE PANEL {tag}" in r.output
    assert "before" in r.output and "after" in r.output
    assert "proven lower bound" in r.output
    assert CAUTION in r.output


def test_max_moves_and_options() -> None:
    tag = _three_phase_panel()
    r = _run(str(DEMO_FILE), "--panel", tag, "--json", "--max-moves", "1", "--keep-sides", "--objective", "neutral")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    assert data["breaker_moves"] <= 1
    assert data["objective"] == "neutral"
    assert data["after"]["neutral_amps"] <= data["before"]["neutral_amps"] + 0.01


def test_out_writes_a_file_that_revalidates(tmp_path: Path) -> None:
    tag = _three_phase_panel()
    out = tmp_path / "balanced.json"
    r = _run(str(DEMO_FILE), "--panel", tag, "--json", "--allow-spaces", "--out", str(out))
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    written = load_project_file(out)  # parse_project again: raises if anything breaks a rule
    original = load_project_file(DEMO_FILE)
    moves = [Move(m["from_slot"], m["to_slot"]) for m in data["moves"]]
    expected = apply_moves(original.panel(tag), moves)
    # the file lists circuits by slot; apply_moves keeps the input order (so undo is exact)
    assert written.panel(tag) == replace(expected, circuits=tuple(sorted(expected.circuits, key=lambda c: c.slot)))
    for p in original.panels:
        if p.tag != tag:
            assert written.panel(p.tag) == p
    assert written.project == original.project


def test_transformer_mode(tmp_path: Path) -> None:
    project = load_project_file(DEMO_FILE)
    xfmr = next(t for t in project.transformers if SYSTEMS[t.secondary].kind.value == "wye")
    out = tmp_path / "rotated.json"
    r = _run(str(DEMO_FILE), "--transformer", xfmr.tag, "--json", "--out", str(out))
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    assert data["transformer"] == xfmr.tag
    assert max(data["after"]["phase_va"].values()) <= max(data["before"]["phase_va"].values()) + 0.1
    assert all({"panel", "rotation", "feeder_rotation", "feeder_landing"} <= set(r) for r in data["rotations"])
    written = load_project_file(out)
    # --out stores each panel's proposed feeder rotation (relative to the panel feeding it).
    for rot in data["rotations"]:
        assert written.panel(rot["panel"]).feeder_rotation == rot["feeder_rotation"]
    text = _run(str(DEMO_FILE), "--transformer", xfmr.tag)
    assert "feeder landings" in text.output and CAUTION in text.output


def test_bad_panel_tag_exits_2_naming_file_and_tag() -> None:
    r = _run(str(DEMO_FILE), "--panel", "NO-SUCH-PANEL")
    assert r.exit_code == 2
    assert "NO-SUCH-PANEL" in r.stderr
    assert str(DEMO_FILE) in r.stderr
    assert "Traceback" not in r.output + r.stderr


@pytest.mark.parametrize(
    "args, words",
    [
        (["missing.json", "--panel", "LP-1"], ["missing.json", "no such file"]),
        ([str(DEMO_FILE)], ["--panel"]),
        ([str(DEMO_FILE), "--panel", "LP-1", "--transformer", "T-1"], ["exactly one"]),
        ([str(DEMO_FILE), "--transformer", "NOPE"], ["NOPE"]),
        ([str(DEMO_FILE), "--panel", "LP-1", "--out", str(DEMO_FILE)], ["new file"]),
    ],
)
def test_bad_input_exits_2(args: list[str], words: list[str]) -> None:
    r = _run(*args)
    assert r.exit_code == 2
    for w in words:
        assert w in r.stderr
    assert "Traceback" not in r.output + r.stderr


def test_invalid_project_file_names_the_problem(tmp_path: Path) -> None:
    data = json.loads(DEMO_FILE.read_text())
    data["panels"][0]["circuits"][0]["slot"] = 999
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(data))
    r = _run(str(bad), "--panel", data["panels"][0]["tag"])
    assert r.exit_code == 2
    assert "bad.json" in r.stderr and data["panels"][0]["tag"] in r.stderr


def test_json_stdout_is_clean_in_a_real_process() -> None:
    # HiGHS prints some diagnostics straight to file descriptor 1; they must not reach stdout.
    tag = _three_phase_panel()
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "server.cli",
            "balance",
            str(DEMO_FILE),
            "--panel",
            tag,
            "--json",
            "--objective",
            "neutral",
            "--time-limit",
            "1",
        ],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    json.loads(proc.stdout)
    assert CAUTION in proc.stderr
