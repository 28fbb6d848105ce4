"""The panel editor in a real browser: keyboard entry down a column, live totals, upstream loading.

Marker ``browser`` (opt-in locally with ``--browser``; always on in CI, where a missing chromium
or Playwright is a failure).  The app runs under uvicorn on 127.0.0.1 (a free port) on a
migrated temporary SQLite database holding the demo; Playwright drives Debian's chromium.
Screenshots of the panel editor and the distribution tree go to test-artifacts/.
"""

from __future__ import annotations

import json
import shutil
from collections.abc import Iterator
from pathlib import Path

import pytest

from server.config import Settings
from server.db import migrate
from server.web.app import create_app
from tests.helpers import DEMO_FILE, thread_server

pytestmark = pytest.mark.browser

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--headless=new",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-dev-shm-usage",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
]


@pytest.fixture
def live_app(tmp_path: Path) -> Iterator[tuple[str, object, int]]:
    """(base URL, app, demo project id) of a server on 127.0.0.1, stopped after the test."""
    url = f"sqlite:///{tmp_path / 'pw.db'}"
    migrate.upgrade(url)
    # single_user: no sign-in on a loopback-only test server (ignored where team use is absent).
    app = create_app(Settings(database_url=url, single_user=True))
    pid = app.state.services.import_file(json.loads(DEMO_FILE.read_text(encoding="utf-8"))).project_id
    try:
        with thread_server(app) as base:
            yield base, app, pid
    finally:
        app.state.engine.dispose()


def _playwright():
    try:
        from playwright.sync_api import expect, sync_playwright
    except ImportError:  # pragma: no cover - depends on the machine
        pytest.fail("Playwright for Python is not installed (pip install playwright)")
    if shutil.which(CHROMIUM) is None:
        pytest.fail(f"{CHROMIUM} is missing: install Debian's chromium")
    return sync_playwright, expect


def test_keyboard_va_entry_updates_phase_total_and_transformer_loading(live_app, artifacts_dir):
    sync_playwright, expect = _playwright()
    base, app, pid = live_app
    snap = app.state.services.snapshot(pid)
    panel = snap.model.panel("LP-1")
    left = [c.slot for c in panel.circuits if c.slot % 2 == 1 and c.feeds is None and c.poles > 0]
    first, second = left[0], left[1]
    phase = "A" if ((first + 1) // 2 - 1) % 3 == 0 else ("B" if ((first + 1) // 2 - 1) % 3 == 1 else "C")
    old_va = panel.circuit_at(first).va or 0

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1800, "height": 1200})
            page.set_default_timeout(15_000)
            errors: list[str] = []
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.goto(f"{base}/projects/{pid}/panels/LP-1")
            page.evaluate("window.__stillHere = 'yes'")  # survives only if the page never reloads

            total = page.locator(f'#phase-totals td[data-role="phase-kva"][data-phase="{phase}"]')
            loading = page.locator('#upstream a[data-tag="T-1"] [data-role="pct"]')
            total_before, loading_before = total.inner_text(), loading.inner_text()

            va = page.locator(f"#s{first}-va")
            va.click()
            va.press("Control+a")
            page.keyboard.type(str(int(old_va + 9000)))
            with page.expect_response(lambda r: r.url.endswith(f"/circuits/{first}") and r.request.method == "POST"):
                page.keyboard.press("Enter")
            # Enter moved to the same field of the next circuit down the column.
            expect(page.locator(f"#s{second}-va")).to_be_focused()
            expect(total).not_to_have_text(total_before)
            expect(loading).not_to_have_text(loading_before)
            assert float(total.inner_text()) - float(total_before) == pytest.approx(9.0, abs=0.02)
            assert float(loading.inner_text().split("%")[0]) > float(loading_before.split("%")[0])
            assert page.evaluate("window.__stillHere") == "yes"
            assert app.state.services.snapshot(pid).model.panel("LP-1").circuit_at(first).va == old_va + 9000

            # A bad value: marked beside the field, what was typed stays, nothing stored.
            page.keyboard.type("9 kW")
            with page.expect_response(lambda r: r.url.endswith(f"/circuits/{second}") and r.status == 422):
                page.keyboard.press("Enter")
            expect(page.locator(f"#td-s{second}-va")).to_have_class("f-va invalid")
            expect(page.locator(f"#s{second}-va-msg")).to_contain_text("must be a number")
            expect(page.locator(f"#s{second}-va")).to_have_value("9 kW")
            assert (
                app.state.services.snapshot(pid).model.panel("LP-1").circuit_at(second).va
                == panel.circuit_at(second).va
            )
            assert not errors, errors
            page.screenshot(path=str(artifacts_dir / "panel-editor.png"), full_page=True)

            page.goto(f"{base}/projects/{pid}/tree")
            expect(page.locator("#riser a[data-tag='T-1']")).to_be_visible()
            page.screenshot(path=str(artifacts_dir / "distribution-tree.png"), full_page=True)
        finally:
            browser.close()
