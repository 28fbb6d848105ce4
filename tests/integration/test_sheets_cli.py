"""``import-sheet`` and ``export-sheet`` against a migrated temporary SQLite database."""

from __future__ import annotations

import io
import json
from pathlib import Path

import openpyxl
import pytest
from click.testing import CliRunner

from server.calc.projectfile import dump_project, load_project_file
from server.commands.sheets import export_sheet, import_sheet
from server.config import Settings
from server.db.migrate import upgrade
from server.db.session import make_engine, make_sessionmaker
from server.services import Services
from tests.helpers import DEMO_FILE
from tests.unit.sheets.conftest import messy_xlsx
from tests.unit.sheets.test_limits import zip_bomb


@pytest.fixture
def store(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    url = f"sqlite:///{tmp_path / 'pw.db'}"
    upgrade(url)
    monkeypatch.setenv("PANELWRIGHT_DATABASE_URL", url)
    monkeypatch.delenv("PANELWRIGHT_MAX_UPLOAD_MB", raising=False)
    services = Services(make_sessionmaker(make_engine(Settings(database_url=url))), cache_size=0)
    project = load_project_file(DEMO_FILE)
    pid = services.create_project(dump_project(project))
    return services, pid, project.project.number


def _run(cmd, args):
    return CliRunner().invoke(cmd, args, catch_exceptions=False)


def _leaf(services, pid):
    model = services.snapshot(pid).model
    return next(p for p in model.panels if not any(c.feeds for c in p.circuits) and "Y/" in p.system)


def test_export_then_import_round_trip(store, tmp_path):
    services, pid, number = store
    out = tmp_path / "set.xlsx"
    res = _run(export_sheet, [number, "--out", str(out)])
    assert res.exit_code == 0, res.output
    assert "engineer of record" in res.output
    before = services.snapshot(pid)
    leaf = _leaf(services, pid)
    res = _run(import_sheet, [str(out), "--project", number, "--panel", leaf.tag, "--sheet", leaf.tag, "--yes"])
    assert res.exit_code == 0, res.output
    after = services.snapshot(pid)
    assert after.model == before.model  # same circuits back
    assert after.data_version == before.data_version + 1

    csv_out = tmp_path / "set.csv"
    assert _run(export_sheet, [str(pid), "--out", str(csv_out)]).exit_code == 0
    assert (tmp_path / "set-summary.csv").read_text(encoding="utf-8-sig").startswith("Panel,")
    res = _run(import_sheet, [str(csv_out), "--project", number, "--yes"])  # every panel via the Panel column
    assert res.exit_code == 0, res.output
    assert services.snapshot(pid).model == before.model

    json_out = tmp_path / "set.json"
    assert _run(export_sheet, [number, "--out", str(json_out)]).exit_code == 0
    assert json.loads(json_out.read_text())["format"] == "panelwright.project"


def test_messy_sheet_preview_writes_nothing_then_yes_writes(store, tmp_path):
    services, pid, number = store
    leaf = _leaf(services, pid)
    path = tmp_path / "messy.xlsx"
    path.write_bytes(messy_xlsx())
    version = services.snapshot(pid).data_version
    res = _run(import_sheet, [str(path), "--project", number, "--panel", leaf.tag])
    assert res.exit_code == 0, res.output
    assert "preview only: nothing was written" in res.output
    assert "totals row" in res.output
    assert services.snapshot(pid).data_version == version
    res = _run(import_sheet, [str(path), "--project", number, "--panel", leaf.tag, "--yes"])
    assert res.exit_code == 0, res.output
    panel = services.snapshot(pid).model.panel(leaf.tag)
    assert [c.slot for c in panel.circuits] == [1, 2, 3, 4, 5, 8, 11]
    assert panel.circuit_at(5).va == 9600.0 and panel.circuit_at(5).poles == 3


def _formula_sheet() -> bytes:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Ckt", "Description", "VA"])
    ws.append([1, "Heater", "=1000*2"])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


@pytest.mark.parametrize(
    ("name", "content", "message"),
    [
        ("notes.xlsx", b"just some text", "is not an XLSX workbook"),
        ("bomb.xlsx", None, "zip bomb"),
        ("formula.xlsx", "formula", "formulas are never evaluated"),
        ("big.csv", "big", "uploads are limited to"),
        ("macro.xlsm", "messy", "macro-enabled"),
    ],
)
def test_bad_files_get_clear_errors_and_write_nothing(store, tmp_path, monkeypatch, name, content, message):
    services, pid, number = store
    leaf = _leaf(services, pid)
    if content is None:
        content = zip_bomb(200)
    elif content == "formula":
        content = _formula_sheet()
    elif content == "messy":
        content = messy_xlsx()
    elif content == "big":
        monkeypatch.setenv("PANELWRIGHT_MAX_UPLOAD_MB", "1")
        content = b"Ckt,Description,VA\n" + b"1,x,1\n" * 200_000
    path = tmp_path / name
    path.write_bytes(content)
    before = services.snapshot(pid)
    res = CliRunner().invoke(import_sheet, [str(path), "--project", number, "--panel", leaf.tag, "--yes"])
    assert res.exit_code == 2
    assert message in res.stderr
    assert name in res.stderr
    assert "Traceback" not in res.output
    after = services.snapshot(pid)
    assert after.data_version == before.data_version and after.model == before.model


def test_unknown_project_panel_and_bad_mapping(store, tmp_path):
    services, pid, number = store
    path = tmp_path / "m.xlsx"
    path.write_bytes(messy_xlsx())
    res = CliRunner().invoke(import_sheet, [str(path), "--project", "NOPE", "--panel", "LP-1"])
    assert res.exit_code == 2 and "no project with number or id 'NOPE'" in res.stderr
    res = CliRunner().invoke(import_sheet, [str(path), "--project", number, "--panel", "ZZ-9"])
    assert res.exit_code == 2 and "has no panel 'ZZ-9'" in res.stderr
    leaf = _leaf(services, pid)
    res = CliRunner().invoke(
        import_sheet, [str(path), "--project", number, "--panel", leaf.tag, "--mapping", '{"columns": {"E": "watts"}}']
    )
    assert res.exit_code == 2 and "'watts'" not in res.stderr and '"watts" is not a role' in res.stderr
    # a mapping correction that changes the result: E as VA instead of kVA
    res = CliRunner().invoke(
        import_sheet, [str(path), "--project", number, "--panel", leaf.tag, "--mapping", '{"columns": {"E": "va"}}']
    )
    assert res.exit_code == 0, res.output
    rtu = next(line for line in res.output.splitlines() if "RTU-1" in line)
    assert "9,600" not in rtu and " 10 " in rtu  # 9.6 read as VA (shown rounded), not 9.6 kVA
    res = CliRunner().invoke(import_sheet, [str(path), "--project", number, "--panel", leaf.tag])
    rtu = next(line for line in res.output.splitlines() if "RTU-1" in line)
    assert "9,600" in rtu


def test_errors_in_rows_refuse_the_write(store, tmp_path):
    services, pid, number = store
    leaf = _leaf(services, pid)
    path = tmp_path / "clash.csv"
    path.write_text("Ckt,Description,Poles,VA\n1,Big,3,3000\n3,Clash,1,500\n", encoding="utf-8")
    before = services.snapshot(pid)
    res = CliRunner().invoke(import_sheet, [str(path), "--project", number, "--panel", leaf.tag, "--yes"])
    assert res.exit_code == 2
    assert (
        f"clash.csv, sheet 'clash', row 3, panel {leaf.tag}, slot 3, column A, slot: the breakers at slots 1 and 3 overlap"
        in res.stderr
    )
    assert "nothing was written" in res.stderr
    assert services.snapshot(pid).model == before.model


def test_two_column_export_and_import_round_trip(store, tmp_path):
    services, pid, number = store
    out = tmp_path / "two.xlsx"
    res = _run(export_sheet, [number, "--out", str(out), "--layout", "two-column"])
    assert res.exit_code == 0, res.output
    before = services.snapshot(pid)
    leaf = _leaf(services, pid)
    wb = openpyxl.load_workbook(out)
    assert wb[leaf.tag]["A3"].value == "Ckt"
    res = _run(import_sheet, [str(out), "--project", number, "--panel", leaf.tag, "--sheet", leaf.tag, "--yes"])
    assert res.exit_code == 0, res.output
    assert "two circuits per row, right half from column O" in res.output
    after = services.snapshot(pid)
    assert after.model == before.model and after.data_version == before.data_version + 1
    # the layout applies to workbooks only
    res = CliRunner().invoke(export_sheet, [number, "--out", str(tmp_path / "x.csv"), "--layout", "two-column"])
    assert res.exit_code == 2 and "--layout two-column applies to .xlsx workbooks" in res.stderr


def _two_column_file(tmp_path, rows, name="two.xlsx"):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Sched"
    for row in rows:
        ws.append(row)
    path = tmp_path / name
    wb.save(path)
    return path


def test_two_column_mapping_json_corrects_one_half(store, tmp_path):
    services, pid, number = store
    leaf = _leaf(services, pid)
    path = _two_column_file(
        tmp_path,
        [
            ["CKT", "DESCRIPTION", "LOAD", "TRIP", "TRIP", "LOAD", "DESCRIPTION", "CKT"],
            [1, "Lights", 1.2, 20, 20, 0.8, "Fan", 2],
            [3, "Heater", 1.5, 20, 40, 3.6, "Pump", 4],
            [5, "Sign", 0.3, 15, "—", None, "—", 6],
        ],
    )
    # guessed: kVA both halves from the values; the 2-pole pump spans rows 3 and 4 on the right
    res = _run(import_sheet, [str(path), "--project", number, "--panel", leaf.tag])
    assert res.exit_code == 0, res.output
    assert '"layout": "two-column", "right_starts": "E"' in res.output
    pump = next(line for line in res.output.splitlines() if "Pump" in line)
    assert "3,600" in pump and "(right half)" in pump
    # the user says the right half's LOAD is in VA (the left half keeps kVA)
    mapping = json.dumps({"layout": "two-column", "right_starts": "E", "right": {"LOAD": "va"}})
    res = _run(import_sheet, [str(path), "--project", number, "--panel", leaf.tag, "--mapping", mapping, "--yes"])
    assert res.exit_code == 0, res.output
    panel = services.snapshot(pid).model.panel(leaf.tag)
    got = {c.slot: (c.poles, c.description, c.va) for c in panel.circuits}
    assert got == {
        1: (1, "Lights", 1200.0),
        2: (1, "Fan", 0.8),
        3: (1, "Heater", 1500.0),
        4: (2, "Pump", 3.6),
        5: (1, "Sign", 300.0),
    }


@pytest.mark.parametrize(
    ("mapping", "message"),
    [
        ('{"layout": "sideways"}', "layout must be 'single' or 'two-column'"),
        ('{"right_starts": "Z"}', "right_starts must be a column letter from B to H"),
        ('{"layout": "single", "right": {"A": "slot"}}', '"right" applies to the two-column layout'),
    ],
)
def test_bad_two_column_mapping_is_a_clear_refusal(store, tmp_path, mapping, message):
    services, pid, number = store
    leaf = _leaf(services, pid)
    path = _two_column_file(tmp_path, [["CKT", "DESCRIPTION", "VA", "TRIP", "TRIP", "VA", "DESCRIPTION", "CKT"]])
    res = CliRunner().invoke(import_sheet, [str(path), "--project", number, "--panel", leaf.tag, "--mapping", mapping])
    assert res.exit_code == 2 and message in res.stderr and "Traceback" not in res.output + res.stderr


def test_two_column_slot_claimed_twice_writes_nothing(store, tmp_path):
    services, pid, number = store
    leaf = _leaf(services, pid)
    path = _two_column_file(
        tmp_path,
        [
            ["CKT", "DESCRIPTION", "VA", "TRIP", "TRIP", "VA", "DESCRIPTION", "CKT"],
            [5, "Lights", 500, 20, 20, 500, "Fan", 6],
            [7, "Heater", 1500, 20, 20, 300, "Sign", 7],
        ],
        name="dup.xlsx",
    )
    before = services.snapshot(pid)
    res = CliRunner().invoke(import_sheet, [str(path), "--project", number, "--panel", leaf.tag, "--yes"])
    assert res.exit_code == 2
    assert (
        f"error: dup.xlsx, sheet 'Sched', row 3 (right half), panel {leaf.tag}, slot 7, column H, slot: "
        "slot 7 is claimed twice: by the left half of row 3 (column A) and by the right half of row 3 (column H)"
    ) in res.stderr
    assert "nothing was written" in res.stderr and "Traceback" not in res.stderr
    after = services.snapshot(pid)
    assert after.model == before.model and after.data_version == before.data_version
