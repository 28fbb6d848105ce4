"""The project manager's growth dashboard and one transformer's growth chart in a real browser.

Marker ``browser`` (opt-in locally with ``--browser``; always on in CI).  Reuses the web
developer's live server fixture (uvicorn on 127.0.0.1, a free port, the demo on a migrated
temporary SQLite database) and Debian's chromium.  Screenshots go to test-artifacts/.
"""

from __future__ import annotations

import pytest

from tests.browser.test_panel_editor_browser import CHROMIUM, CHROMIUM_ARGS, _playwright, live_app  # noqa: F401

pytestmark = pytest.mark.browser


def test_dashboard_and_transformer_chart(live_app, artifacts_dir):  # noqa: F811
    sync_playwright, expect = _playwright()
    base, app, pid = live_app
    svc = app.state.services
    svc.issue_revision(pid, description="Issued for review", issued_by="AB")
    svc.edit_circuit(pid, "LP-1", 1, {"va": "6000"})
    svc.issue_revision(pid, description="Tenant changes", issued_by="AB")

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1500, "height": 1100})
            page.set_default_timeout(15_000)
            errors: list[str] = []
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.goto(f"{base}/projects/{pid}/growth")
            rows = page.locator("#closest-to-limit tbody tr")
            expect(rows).to_have_count(11)
            used = [float(x) for x in rows.evaluate_all("rs => rs.map(r => r.dataset.used)")]
            assert used == sorted(used, reverse=True)
            growth = page.locator('#row-LP-1 [data-role="growth"]').inner_text()
            assert float(growth) > 0  # LP-1 grew between the first revision and now
            page.screenshot(path=str(artifacts_dir / "growth-dashboard.png"), full_page=True)

            page.locator('#row-T-1 a[data-role="chart-link"]').click()
            page.wait_for_url("**/growth/nodes/T-1")
            chart = page.locator("#growth-chart svg")
            expect(chart).to_be_visible()
            box = chart.bounding_box()
            assert box is not None and box["width"] > 300 and box["height"] > 150
            labels = page.locator("#growth-table tbody tr").evaluate_all("rs => rs.map(r => r.dataset.label)")
            assert labels == ["Rev 1", "Rev 2", "Working copy"]
            expect(page.locator('#headroom [data-role="binding"]')).not_to_be_empty()
            page.screenshot(path=str(artifacts_dir / "growth-transformer-T-1.png"), full_page=True)

            # What-if on a panel: the preview arrives by htmx, nothing is saved.
            version = svc.snapshot(pid).data_version
            page.goto(f"{base}/projects/{pid}/growth/nodes/LP-2")
            page.fill("#w-kva", "3")
            page.select_option("#w-category", "receptacle")
            page.click("#whatif-preview")
            expect(page.locator("#whatif-preview-result")).to_be_visible()
            expect(page.locator('#whatif-changes tr[data-tag="T-2"]')).to_have_count(1)
            assert svc.snapshot(pid).data_version == version
            page.screenshot(path=str(artifacts_dir / "growth-whatif-LP-2.png"), full_page=True)
            assert errors == []
        finally:
            browser.close()


def test_metered_upload_analysis_and_use(live_app, artifacts_dir, tmp_path):  # noqa: F811
    """Upload a 31-day recording with one bad row: analysis and chart shown, nothing stored; then use it."""
    from datetime import datetime, timedelta

    sync_playwright, expect = _playwright()
    base, app, pid = live_app
    rows = ["timestamp,kVA"]
    t = datetime(2026, 3, 1)
    for i in range(31 * 96):
        rows.append(f"{t:%Y-%m-%d %H:%M},{36.0 if i == 900 else 18.0 + (i % 96) / 12}")
        t += timedelta(minutes=15)
    rows.insert(3, "2026-03-01 00:30,n/a")  # line 4 of the file
    csv_path = tmp_path / "lp1-meter.csv"
    csv_path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    svc = app.state.services
    version = svc.snapshot(pid).data_version

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1400, "height": 1100})
            page.set_default_timeout(15_000)
            page.goto(f"{base}/projects/{pid}/growth/metered?node=LP-1")
            page.set_input_files("#m-file", str(csv_path))
            page.click("#metered-analyse")
            expect(page.locator("#metered-analysis")).to_be_visible()
            expect(page.locator("#metered-chart svg")).to_be_visible()
            expect(page.locator("#bad-rows td").first).to_have_text("4")
            expect(page.locator('[data-role="existing"]')).to_contain_text("45.0 kVA")  # 36 × 1.25
            assert svc.snapshot(pid).data_version == version  # analysed, not stored
            page.screenshot(path=str(artifacts_dir / "growth-metered-analysis.png"), full_page=True)
            page.click("#metered-confirm")
            page.wait_for_url("**/growth/nodes/LP-1")
            expect(page.locator("#growth-node")).to_contain_text("in use")
        finally:
            browser.close()
    assert svc.snapshot(pid).result.panels["LP-1"].connected_by_category["metered_existing"] == 45_000.0
