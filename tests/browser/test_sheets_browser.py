"""The import mapping screen in a real browser: upload, fix a column, watch the preview change, confirm.

Marker ``browser`` (opt-in locally with ``--browser``; always on in CI).  The live server is the
panel-editor browser test's fixture (uvicorn on 127.0.0.1, a temporary SQLite database holding
the demo project); Playwright drives Debian's chromium.  Screenshots go to test-artifacts/.
"""

from __future__ import annotations

import io
import shutil
from pathlib import Path

import pytest

from server.sheets.uploads import UploadStore
from tests.browser import test_panel_editor_browser as _editor

pytestmark = pytest.mark.browser

CHROMIUM = _editor.CHROMIUM
CHROMIUM_ARGS = _editor.CHROMIUM_ARGS

# The web tests' live server: uvicorn on 127.0.0.1 (a free port), a migrated temporary SQLite
# database holding the demo project; stopped after each test.
live_app = _editor.live_app


def _sheet(path: Path) -> None:
    """A small schedule whose load column is headed "Rating": the guess leaves it unmapped."""
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.append(["Ckt", "Description", "Rating", "Trip", "Poles"])
    ws.append([1, "Office lights", 1.2, 20, 1])
    ws.append([3, "<script>window.__pwned = 1</script>", 0.4, 20, 1])
    ws.append([2, "Condenser", 4.8, 30, 2])
    buf = io.BytesIO()
    wb.save(buf)
    path.write_bytes(buf.getvalue())


def test_mapping_screen_upload_fix_preview_confirm(live_app, tmp_path, artifacts_dir):
    if shutil.which(CHROMIUM) is None:
        pytest.fail(f"{CHROMIUM} is missing: install Debian's chromium")
    from playwright.sync_api import expect, sync_playwright

    base, app, pid = live_app
    app.state.sheet_uploads = UploadStore(tmp_path / "uploads")
    leaf = next(
        p
        for p in app.state.services.snapshot(pid).model.panels
        if not any(c.feeds for c in p.circuits) and "Y/" in p.system
    )
    sheet = tmp_path / "schedule.xlsx"
    _sheet(sheet)
    version = app.state.services.snapshot(pid).data_version

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1400, "height": 1000})
            page.set_default_timeout(15_000)
            page.goto(f"{base}/projects/{pid}/sheets")
            page.set_input_files("#f-file", str(sheet))
            page.select_option("#f-target", leaf.tag)
            page.click("#upload-form button[type=submit]")
            page.wait_for_selector("#import-form")

            va_cell = page.locator('#preview-table tr[data-slot="1"] td[data-field="va"]')
            expect(va_cell).to_have_text("")  # "Rating" was not recognised: no load yet
            rating = page.locator('select[data-column="C"]')
            expect(rating).to_have_value("ignore")

            rating.select_option("kva")  # the correction: column C holds kVA
            expect(va_cell).to_have_text("1,200")
            expect(page.locator('#preview-table tr[data-slot="2"] td[data-field="va"]')).to_have_text("4,800")
            expect(page.locator('#preview-table tr[data-slot="3"] td[data-field="description"]')).to_have_text(
                "<script>window.__pwned = 1</script>"
            )
            assert page.evaluate("window.__pwned") is None
            assert app.state.services.snapshot(pid).data_version == version  # nothing written yet
            page.screenshot(path=str(artifacts_dir / "sheets-mapping-preview.png"), full_page=True)

            page.click("#confirm-import")
            page.wait_for_url(f"**/projects/{pid}/panels/{leaf.tag}*")
            grid = page.locator("#circuit-grid")
            expect(grid).to_be_visible()
            values = page.eval_on_selector_all("#circuit-grid input[type=text]", "els => els.map(e => e.value)")
            assert "Office lights" in values and "Condenser" in values
            assert "<script>window.__pwned = 1</script>" in values
            assert page.evaluate("window.__pwned") is None
            page.screenshot(path=str(artifacts_dir / "sheets-imported-panel.png"), full_page=True)
        finally:
            browser.close()

    panel = app.state.services.snapshot(pid).model.panel(leaf.tag)
    assert [(c.slot, c.poles, c.va, c.breaker_amps) for c in panel.circuits] == [
        (1, 1, 1200.0, 20),
        (2, 2, 4800.0, 30),
        (3, 1, 400.0, 20),
    ]
