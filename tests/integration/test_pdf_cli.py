"""``panelwright pdf`` from a project file and from a stored project; user errors exit 2."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from server.calc.projectfile import dump_project, load_project_file
from server.commands.pdf import command
from tests.helpers import DEMO_FILE
from tests.unit.pdf.pdftext import MARKER, panel_pages, read_pages


def _run(args: list[str]):
    return CliRunner().invoke(command, args, catch_exceptions=False)


@pytest.fixture
def cache(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    d = tmp_path / "cache"
    monkeypatch.setenv("PANELWRIGHT_PDF_CACHE_DIR", str(d))
    return d


def test_selected_sheets_from_a_file(tmp_path: Path, cache: Path):
    out = tmp_path / "set.pdf"
    r = _run([str(DEMO_FILE), "--out", str(out), "--sheets", "LP-1,T-1", "--workers", "1"])
    assert r.exit_code == 0, r.output
    assert out.read_bytes().startswith(b"%PDF")
    pages = read_pages(out.read_bytes())
    assert len(pages) == 2
    assert list(panel_pages(pages)) == ["LP-1"]
    assert "TRANSFORMER SCHEDULE" in pages[0].text
    assert "2 sheets (2 rendered, 0 from cache)" in r.output
    assert "engineer of record" in r.output
    assert any(cache.rglob("*.pdf")), "PANELWRIGHT_PDF_CACHE_DIR holds the rendered sheets"
    again = _run([str(DEMO_FILE), "--out", str(out), "--sheets", "LP-1,T-1"])
    assert "2 sheets (0 rendered, 2 from cache)" in again.output


def test_previous_and_revision_mark_changes(tmp_path: Path, cache: Path):
    data = copy.deepcopy(dump_project(load_project_file(DEMO_FILE)))
    lp1 = next(p for p in data["panels"] if p["tag"] == "LP-1")
    next(c for c in lp1["circuits"] if c["slot"] == 5)["va"] += 250
    new = tmp_path / "new.json"
    new.write_text(json.dumps(data))
    out = tmp_path / "rev3.pdf"
    r = _run(
        [
            str(new),
            "--out",
            str(out),
            "--previous",
            str(DEMO_FILE),
            "--revision",
            "3",
            "--revision-date",
            "2026-12-09",
            "--revision-description",
            "Bid set",
            "--issued-by",
            "JK",
            "--sheets",
            "LP-1,LP-2",
        ]
    )
    assert r.exit_code == 0, r.output
    pages = panel_pages(read_pages(out.read_bytes()))
    lp1_page, lp2_page = pages["LP-1"][0], pages["LP-2"][0]
    assert any(c["text"] == MARKER for c in lp1_page.chars)
    assert "Bid set" in lp1_page.strip and "2026-12-09" in lp1_page.strip
    assert not any(c["text"] == MARKER for c in lp2_page.chars)
    assert "Bid set" not in lp2_page.strip  # LP-2 did not change in revision 3


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["missing.json"], "missing.json: no such file"),
        ([str(DEMO_FILE), "--sheets", "LP-9"], "no sheet named LP-9"),
        ([str(DEMO_FILE), "--previous", str(DEMO_FILE)], "--previous needs --revision"),
        ([str(DEMO_FILE), "--revision-date", "2026-01-01"], "need --revision"),
    ],
)
def test_user_errors_exit_2_with_a_message(tmp_path: Path, cache: Path, args, message):
    r = CliRunner().invoke(command, [*args, "--out", str(tmp_path / "x.pdf")])
    assert r.exit_code == 2, r.output
    assert message in r.output
    assert "Traceback" not in r.output
    assert not (tmp_path / "x.pdf").exists()


def test_invalid_project_file_names_the_problem(tmp_path: Path, cache: Path):
    data = copy.deepcopy(dump_project(load_project_file(DEMO_FILE)))
    next(p for p in data["panels"] if p["tag"] == "LP-1")["circuits"][0]["va"] = -5
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(data))
    r = CliRunner().invoke(command, [str(bad), "--out", str(tmp_path / "x.pdf")])
    assert r.exit_code == 2
    assert "LP-1" in r.output and "va" in r.output


def test_stored_project_by_number(tmp_path: Path, cache: Path, monkeypatch: pytest.MonkeyPatch):
    from server.config import Settings
    from server.db.migrate import upgrade
    from server.db.session import make_engine, make_sessionmaker
    from server.services import Services

    url = f"sqlite:///{tmp_path / 'pw.db'}"
    upgrade(url)
    monkeypatch.setenv("PANELWRIGHT_DATABASE_URL", url)
    services = Services(make_sessionmaker(make_engine(Settings(database_url=url))), cache_size=0)
    project = load_project_file(DEMO_FILE)
    pid = services.create_project(dump_project(project))
    services.issue_revision(pid, description="Issued for permit", issued_by="JK")
    out = tmp_path / "stored.pdf"
    r = _run([project.project.number, "--out", str(out), "--sheets", "LP-1"])
    assert r.exit_code == 0, r.output
    page = read_pages(out.read_bytes())[0]
    assert "Issued for permit" in page.strip  # the stored revision 1 is the one printed
    assert "DRAFT" not in page.strip
    r = CliRunner().invoke(command, ["99-999", "--out", str(out)])
    assert r.exit_code == 2 and "no project with that number" in r.output
