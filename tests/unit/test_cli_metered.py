"""Tests of ``panelwright metered``: text and JSON reports, bad input, strict refusal.

Sources: NFPA 70-2023 220.87, from memory (existing load = maximum demand × 125 %);
kVA = kW / pf (definition of power factor, common practice).
"""

from __future__ import annotations

import json
from datetime import datetime, timedelta
from pathlib import Path

import pytest
from click.testing import CliRunner

from server.commands import CAUTION
from server.commands.metered import command, sparkline


def _write(tmp_path: Path, rows: list[str], header: str = "timestamp,kW_A,kW_B,kW_C", name: str = "meter.csv") -> Path:
    path = tmp_path / name
    path.write_text(header + "\n" + "\n".join(rows) + "\n")
    return path


def _days(n_days: int, peak_index: int) -> list[str]:
    start = datetime(2024, 4, 1)
    rows = []
    for i in range(n_days * 96):
        t = start + timedelta(minutes=15 * i)
        a, b, c = (27.0, 18.0, 9.0) if i == peak_index else (9.0, 9.0, 9.0)
        rows.append(f"{t:%Y-%m-%d %H:%M},{a},{b},{c}")
    return rows


def run(*args: str):
    return CliRunner().invoke(command, list(args), prog_name="panelwright metered")


def test_json_holds_the_promised_fields(tmp_path: Path) -> None:
    path = _write(tmp_path, _days(31, peak_index=500))
    res = run(str(path), "--json", "--pf", "0.9")
    assert res.exit_code == 0, res.stderr
    data = json.loads(res.stdout)
    for key in ("rows", "interval_minutes", "gaps", "duplicates", "peak_kva", "peak_at", "existing_load_kva"):
        assert key in data
    assert data["rows"] == 31 * 96 and data["interval_minutes"] == 15
    assert data["peak_kva"] == pytest.approx(54 / 0.9)  # 27 + 18 + 9 kW at pf 0.9
    assert data["peak_at"] == (datetime(2024, 4, 1) + timedelta(minutes=15 * 500)).isoformat()
    assert data["conversion"] == "kW converted to kVA at pf 0.90"
    assert data["basis"] == "30-day alternative"
    # NFPA 70-2023 220.87 Exception, from memory: highest loaded phase (A, 27 kW) × 3 phases × 125 %.
    assert data["existing_load_kva"] == pytest.approx(27 / 0.9 * 3 * 1.25, rel=1e-6)
    assert data["caution"] == CAUTION


def test_text_report_has_summary_sparkline_and_caution(tmp_path: Path) -> None:
    path = _write(tmp_path, _days(31, peak_index=1500))
    res = run(str(path), "--pf", "1")
    assert res.exit_code == 0, res.stderr
    out = res.stdout
    assert "Metered demand: " in out and "meter.csv" in out
    assert "kW converted to kVA at pf 1.00" in out
    assert "Peak           54.0 kVA at 2024-04-16T15:00:00" in out
    assert "Basis          30-day alternative" in out
    assert "Existing load  101.2 kVA" in out  # 27 × 3 × 1.25 = 101.25
    assert "Daily peaks    |" in out
    assert CAUTION in out


def test_insufficient_recording_says_so_without_existing_load(tmp_path: Path) -> None:
    path = _write(tmp_path, _days(3, peak_index=10))
    res = run(str(path), "--json")
    assert res.exit_code == 0
    data = json.loads(res.stdout)
    assert data["basis"] == "insufficient: less than 30 days"
    assert data["existing_load_kva"] is None
    assert "No existing load computed" in data["message"]
    text = run(str(path)).stdout
    assert "Existing load  not computed" in text and "No existing load computed" in text


def test_bad_rows_are_listed_or_refused_with_strict(tmp_path: Path) -> None:
    rows = _days(1, peak_index=3)
    rows[5] = "2024-04-01 01:15,9,oops,9"  # line 7
    path = _write(tmp_path, rows)
    res = run(str(path))
    assert res.exit_code == 0
    assert "Bad rows left out (1):" in res.stdout
    assert "line 7: kW_B: 'oops' is not a number" in res.stdout
    strict = run(str(path), "--strict")
    assert strict.exit_code == 2
    assert strict.stdout == ""
    assert "meter.csv" in strict.stderr and "refused (strict)" in strict.stderr
    assert "line 7: kW_B: 'oops' is not a number" in strict.stderr
    assert "Traceback" not in strict.stderr


@pytest.mark.parametrize(
    ("content", "fragment"),
    [
        (b"", "the file is empty"),
        (b"\x89PNG\r\n\x1a\n\x00\x00\x00", "binary"),
        (b"alpha,beta\n1,2\n", "no usable columns"),
        (b'{"not": "csv"}\n', "no usable columns"),
    ],
)
def test_unusable_files_exit_2_naming_the_file(tmp_path: Path, content: bytes, fragment: str) -> None:
    path = tmp_path / "feeder-7.csv"
    path.write_bytes(content)
    res = run(str(path))
    assert res.exit_code == 2
    assert str(path) in res.stderr and fragment in res.stderr
    assert "Traceback" not in res.stderr + res.stdout


def test_missing_file_and_bad_options_exit_2(tmp_path: Path) -> None:
    res = run(str(tmp_path / "absent.csv"))
    assert res.exit_code == 2 and "absent.csv: file not found" in res.stderr
    path = _write(tmp_path, _days(1, peak_index=3))
    res = run(str(path), "--tz", "Nowhere/Special")
    assert res.exit_code == 2 and "unknown time zone 'Nowhere/Special'" in res.stderr
    res = run(str(path), "--pf", "1.5")
    assert res.exit_code == 2 and "power factor" in res.stderr
    res = run(str(path), "--pf", "high")
    assert res.exit_code == 2 and "Traceback" not in res.stderr


def test_time_zone_option_counts_daylight_saving_repeats(tmp_path: Path) -> None:
    # America/Chicago, 2023-11-05: local 01:00-01:45 happens twice (IANA tz database).
    rows = []
    wall = [datetime(2023, 11, 5, 0, 0) + timedelta(minutes=15 * i) for i in range(8)]
    wall += [datetime(2023, 11, 5, 1, 0) + timedelta(minutes=15 * i) for i in range(8)]
    for i, t in enumerate(wall):
        rows.append(f"{t:%Y-%m-%d %H:%M},{10 + i}")
    path = _write(tmp_path, rows, header="timestamp,kVA")
    data = json.loads(run(str(path), "--json", "--tz", "America/Chicago").stdout)
    assert data["dst_repeats"] == 4 and data["duplicates"] == 0 and data["gaps"] == 0
    plain = json.loads(run(str(path), "--json").stdout)
    assert plain["duplicates"] == 4 and plain["dst_repeats"] == 0


def test_sparkline_is_ascii_and_bounded() -> None:
    line = sparkline([float(i % 10) for i in range(365)])
    assert len(line) == 73 and line.isascii()
    assert sparkline([0.0, 5.0, 10.0]) == " =@"
    assert sparkline([]) == ""
    assert sparkline([3.0, 3.0]) == "@@"


def test_metered_runs_through_the_panelwright_entry_point(tmp_path: Path) -> None:
    from server.cli import COMMAND_MODULES, cli

    assert "metered" in COMMAND_MODULES
    path = _write(tmp_path, _days(2, peak_index=7))
    res = CliRunner().invoke(cli, ["metered", str(path), "--json"], prog_name="panelwright")
    assert res.exit_code == 0, res.stderr
    assert json.loads(res.stdout)["rows"] == 2 * 96
    res = CliRunner().invoke(cli, ["metered", str(tmp_path / "none.csv")], prog_name="panelwright")
    assert res.exit_code == 2 and "none.csv: file not found" in res.stderr
