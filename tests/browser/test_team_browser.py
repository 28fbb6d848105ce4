"""Two people in two real browsers: sign in, see each other on the panel, and a stale edit resolved.

Marker ``browser`` (opt-in locally with ``--browser``; always on in CI).  The app runs with
accounts (not single-user mode) under uvicorn on 127.0.0.1 (a free port) on a migrated
temporary SQLite database holding the demo; Playwright drives Debian's chromium with two
separate browser contexts (two cookie jars, two people).
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path

import pytest

from server.auth.accounts import add_user
from server.config import Settings
from server.db import migrate
from server.web.app import create_app
from tests.browser.test_panel_editor_browser import CHROMIUM, CHROMIUM_ARGS, _playwright
from tests.helpers import DEMO_FILE, thread_server

pytestmark = pytest.mark.browser
PASSWORD = "correct-horse-battery"


@pytest.fixture
def team_app(tmp_path: Path) -> Iterator[tuple[str, object, int]]:
    url = f"sqlite:///{tmp_path / 'pw.db'}"
    migrate.upgrade(url)
    app = create_app(Settings(database_url=url))
    for name in ("alice", "bruno"):
        add_user(app.state.services.sessions, name=name, role="engineer", password=PASSWORD)
    pid = app.state.services.import_file(json.loads(DEMO_FILE.read_text(encoding="utf-8"))).project_id
    try:
        with thread_server(app) as base:
            yield base, app, pid
    finally:
        app.state.engine.dispose()


def test_two_people_stale_edit_keep_mine(team_app, artifacts_dir):
    sync_playwright, expect = _playwright()
    base, app, pid = team_app
    panel = app.state.services.snapshot(pid).model.panel("LP-1")
    slot = next(c.slot for c in panel.circuits if c.feeds is None and c.poles == 1)
    url = f"{base}/projects/{pid}/panels/LP-1"

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            pages = {}
            for name in ("alice", "bruno"):
                page = browser.new_context(viewport={"width": 1800, "height": 1200}).new_page()
                page.set_default_timeout(15_000)
                page.goto(url)  # not signed in: the sign-in page, coming back here after
                expect(page.locator("h1")).to_have_text("Sign in")
                page.fill('input[name="name"]', name)
                page.fill('input[name="password"]', PASSWORD)
                page.click('button[type="submit"]')
                page.wait_for_url(url)
                expect(page.locator("#user-menu")).to_contain_text(name)
                pages[name] = page
            alice, bruno = pages["alice"], pages["bruno"]
            expect(bruno.locator("#presence")).to_contain_text("alice")  # bruno's first poll sees alice

            # Alice saves first.
            box = alice.locator(f"#s{slot}-description")
            box.fill("Alice: copier")
            with alice.expect_response(lambda r: r.url.endswith(f"/circuits/{slot}") and r.request.method == "POST"):
                box.press("Tab")
            # Bruno's page still shows the old version: his save is refused, his typing kept.
            mine = bruno.locator(f"#s{slot}-description")
            mine.fill("Bruno: plotter")
            with bruno.expect_response(lambda r: r.url.endswith(f"/circuits/{slot}") and r.status == 409):
                mine.press("Tab")
            notice = bruno.locator("#conflict")
            expect(notice).to_contain_text("changed by alice")
            expect(notice.locator("#conflict-description .theirs")).to_have_text("Alice: copier")
            expect(bruno.locator(f"#s{slot}-description")).to_have_value("Bruno: plotter")
            bruno.screenshot(path=str(artifacts_dir / "team-conflict.png"), full_page=False)
            with bruno.expect_response(lambda r: r.url.endswith(f"/circuits/{slot}") and r.status == 200):
                notice.locator("#conflict-description button", has_text="Keep mine").click()
            expect(bruno.locator("#conflict")).to_have_count(0)
        finally:
            browser.close()
    stored = app.state.services.snapshot(pid).model.panel("LP-1").circuit_at(slot)
    assert stored.description == "Bruno: plotter"
