"""Phase balancing in a real browser: open LP-1, Balance phases, see the preview, apply, see the new totals, undo.

Marker ``browser`` (opt-in locally with ``--browser``; always on in CI).  Reuses the panel
editor's server fixture (uvicorn on 127.0.0.1, temporary SQLite database holding the demo) and
Debian's chromium.  The expected figures come from the balancer the CLI runs
(``balance_panel_in_project`` on the stored project, the same call ``panelwright balance`` makes).
Screenshot: test-artifacts/balance-preview.png.
"""

from __future__ import annotations

import pytest

from server.calc.balance import BalanceOptions, balance_panel_in_project
from tests.browser.test_panel_editor_browser import CHROMIUM, CHROMIUM_ARGS, _playwright, live_app  # noqa: F401

pytestmark = pytest.mark.browser


def test_balance_preview_apply_and_undo(live_app, artifacts_dir):  # noqa: F811 - the imported fixture
    sync_playwright, expect = _playwright()
    base, app, pid = live_app
    svc = app.state.services
    original = svc.export_file(pid)
    expected = balance_panel_in_project(svc.snapshot(pid).model, "LP-1")
    assert expected.moves, "LP-1 of the demo is imbalanced: the balancer must propose moves"
    after_kva = {ph: f"{va / 1000:.2f}" for ph, va in expected.after.phase_va.items()}

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1800, "height": 1300})
            page.set_default_timeout(30_000)
            errors: list[str] = []
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.goto(f"{base}/projects/{pid}/panels/LP-1")
            page.evaluate("window.__stillHere = 'yes'")  # survives only if the page never reloads

            page.get_by_text("Balance phases", exact=True).click()
            preview = page.locator("#balance-preview")
            expect(preview).to_be_visible()
            expect(page.locator("#board-current td.ckt.moved")).to_have_count(len(expected.moves))
            expect(page.locator("#board-proposed td.ckt.moved")).to_have_count(len(expected.moves))
            first = expected.moves[0]
            expect(page.locator(f"#current-s{first.from_slot} .mv")).to_have_text(f"→ {first.to_slot}")
            expect(page.locator(f"#proposed-s{first.to_slot} .mv")).to_have_text(f"← {first.from_slot}")
            expect(page.locator('#balance-loading tr[data-role="max-phase"] td[data-col="after"]')).to_have_text(
                f"{expected.after.max_phase_va:,.0f}"
            )
            expect(page.locator("#balance-bound [data-role=gap]")).to_be_visible()
            page.screenshot(path=str(artifacts_dir / "balance-preview.png"), full_page=True)

            # Other options re-run the preview in place; Cancel closes it without saving anything.
            page.locator("#balance-max-moves").fill("2")
            with page.expect_response(lambda r: "/balance?" in r.url and "max_moves=2" in r.url and r.status == 200):
                page.locator("#balance-run").click()
            capped = balance_panel_in_project(svc.snapshot(pid).model, "LP-1", BalanceOptions(max_moves=2))
            expect(page.locator("#board-current td.ckt.moved")).to_have_count(len(capped.moves))
            page.locator("#balance-cancel").click()
            expect(page.locator("#balance-panel")).to_have_count(0)
            assert svc.export_file(pid) == original
            page.get_by_text("Balance phases", exact=True).click()
            expect(page.locator("#board-current td.ckt.moved")).to_have_count(len(expected.moves))

            with page.expect_response(lambda r: r.url.endswith("/balance/apply") and r.status == 200):
                page.locator("#balance-apply").click()
            expect(page.locator("#balance-message")).to_contain_text("breakers moved")
            for ph, text in after_kva.items():
                expect(page.locator(f'#phase-totals td[data-role="phase-kva"][data-phase="{ph}"]')).to_have_text(text)
            # The grid shows the moved breaker at its new slot, without a reload.
            moved = svc.snapshot(pid).model.panel("LP-1").circuit_at(first.to_slot)
            expect(page.locator(f"#s{first.to_slot}-description")).to_have_value(moved.description)
            assert page.evaluate("window.__stillHere") == "yes"
            page.screenshot(path=str(artifacts_dir / "balance-applied.png"), full_page=True)

            with page.expect_response(lambda r: r.url.endswith("/balance/undo") and r.status == 200):
                page.locator("#balance-undo").click()
            expect(page.locator("#balance-message")).to_contain_text("previous arrangement")
            before_kva = {ph: f"{va / 1000:.2f}" for ph, va in expected.before.phase_va.items()}
            for ph, text in before_kva.items():
                expect(page.locator(f'#phase-totals td[data-role="phase-kva"][data-phase="{ph}"]')).to_have_text(text)
            assert svc.export_file(pid) == original
            page.locator("#balance-close").click()
            expect(page.locator("#balance-panel")).to_have_count(0)
            assert page.evaluate("window.__stillHere") == "yes"
            assert not errors, errors
        finally:
            browser.close()
