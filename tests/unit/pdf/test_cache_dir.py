"""Where the PDF sheet cache lives: the ``pdf_cache_dir`` setting (PANELWRIGHT_PDF_CACHE_DIR),
else ./var/pdf-cache for the server and a per-user temporary folder for the CLI."""

from __future__ import annotations

import tempfile
from pathlib import Path

import pytest
from click.testing import CliRunner

from server.config import Settings
from server.pdf.render import DEFAULT_CACHE_DIR, default_cache_dir


def test_the_setting_decides(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    monkeypatch.delenv("PANELWRIGHT_PDF_CACHE_DIR", raising=False)
    chosen = Settings(pdf_cache_dir=str(tmp_path / "sheets"))
    assert default_cache_dir(settings=chosen) == tmp_path / "sheets"
    assert default_cache_dir(cli=True, settings=chosen) == tmp_path / "sheets"


def test_read_from_the_environment_through_settings(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    monkeypatch.setenv("PANELWRIGHT_PDF_CACHE_DIR", str(tmp_path / "env-cache"))
    assert Settings().pdf_cache_dir == str(tmp_path / "env-cache")
    assert default_cache_dir() == tmp_path / "env-cache"
    assert default_cache_dir(cli=True) == tmp_path / "env-cache"


def test_defaults_when_unset(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("PANELWRIGHT_PDF_CACHE_DIR", raising=False)
    assert Settings().pdf_cache_dir is None
    assert default_cache_dir() == DEFAULT_CACHE_DIR == Path("var") / "pdf-cache"
    cli = default_cache_dir(cli=True)
    assert cli.parent == Path(tempfile.gettempdir()) and cli.name.startswith("panelwright-pdf-cache-")


def test_the_cli_names_a_malformed_setting(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    from server.commands.pdf import command
    from tests.helpers import DEMO_FILE

    monkeypatch.setenv("PANELWRIGHT_PORT", "eighty")
    out = tmp_path / "x.pdf"
    r = CliRunner().invoke(command, [str(DEMO_FILE), "--out", str(out), "--sheets", "LP-1"])
    assert r.exit_code == 2, r.output
    assert "PANELWRIGHT_PORT" in r.output and "Traceback" not in r.output
    assert not out.exists()
