"""Test configuration shared by every test folder.

Browser tests (``-m browser``) are opt-in locally with ``--browser`` and always on in CI
(``CI`` set), where a missing browser is a failure, not a skip.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, settings

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

ARTIFACTS = ROOT / "test-artifacts"

# Shared machines are noisy: a per-example deadline would make property tests fail on load,
# not on wrong answers.  Examples stay bounded by max_examples.
# In CI the examples are derandomised so a run is reproducible; locally they vary and keep
# finding new cases.
settings.register_profile(
    "panelwright",
    deadline=None,
    print_blob=True,
    suppress_health_check=[HealthCheck.too_slow],
    derandomize=bool(os.environ.get("CI")),
)
settings.load_profile("panelwright")


def pytest_addoption(parser: pytest.Parser) -> None:
    parser.addoption("--browser", action="store_true", help="run the Playwright browser tests")


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    if config.getoption("--browser") or os.environ.get("CI"):
        return
    skip = pytest.mark.skip(reason="browser tests are opt-in locally: pass --browser (always on in CI)")
    for item in items:
        if "browser" in item.keywords:
            item.add_marker(skip)


@pytest.fixture(scope="session")
def artifacts_dir() -> Path:
    ARTIFACTS.mkdir(exist_ok=True)
    return ARTIFACTS
