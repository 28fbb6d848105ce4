"""Documentation checks: every setting is in DEVELOPERS.md; the README opens as promised."""

from __future__ import annotations

import re

from server.config import Settings
from tests.helpers import ROOT

DEVELOPERS = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _settings_in_code() -> set[str]:
    names = {f"PANELWRIGHT_{name.upper()}" for name in Settings.model_fields}
    for path in (ROOT / "server").rglob("*.py"):
        names.update(re.findall(r"PANELWRIGHT_[A-Z][A-Z0-9_]+", path.read_text(encoding="utf-8")))
    return names


def test_every_setting_is_documented_in_developers_md() -> None:
    missing = sorted(n for n in _settings_in_code() if f"`{n}`" not in DEVELOPERS)
    assert not missing, f"settings missing from DEVELOPERS.md: {missing}"


def test_readme_opens_with_the_job_then_the_two_commands() -> None:
    body = README.split("\n", 2)[2]
    first_paragraph = body.strip().split("\n\n", 1)[0]
    assert first_paragraph.startswith("Electrical engineers and designers")
    setup = README.split("## Set-up on a fresh machine", 1)[1].split("\n## ", 1)[0]
    commands = re.findall(r"```sh\n(.*?)\n```", setup, flags=re.S)
    assert commands == ["make run", "make test"]


def test_ci_runs_the_readme_test_command() -> None:
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert re.search(r"^make test$", ci, flags=re.M)


def test_readme_carries_the_caution() -> None:
    assert "never replace" in README and "local amendments" in README
