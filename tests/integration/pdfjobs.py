"""Helpers of the tests that make PDF sets through the web app: a private sheet cache and waiting for a job."""

from __future__ import annotations

import time

import pytest

from tests.integration.web.conftest import htmx


@pytest.fixture(autouse=True)
def private_pdf_cache(tmp_path, monkeypatch):
    """Each test renders into its own cache folder (import this fixture into the test module)."""
    monkeypatch.setenv("PANELWRIGHT_PDF_CACHE_DIR", str(tmp_path / "pdf-cache"))


def follow_job(client, url: str, timeout_s: float = 180.0) -> str:
    """Poll a PDF job's fragment as the page's htmx does until it is done or failed; its HTML."""
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        r = client.get(url, headers=htmx())
        assert r.status_code == 200, r.text
        if 'data-state="done"' in r.text or 'data-state="failed"' in r.text:
            return r.text
        assert 'hx-trigger="every 500ms"' in r.text  # still polling
        time.sleep(0.25)
    raise AssertionError("the PDF job did not finish in time")
