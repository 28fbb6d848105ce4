"""A reviewer in a real browser: the panel page loads the comment thread, a comment is added with htmx
and comes back as text (not markup), and the reviewer cannot resolve an engineer's comment.

Marker ``browser`` (opt-in locally with ``--browser``; always on in CI).  Server fixture from
tests/browser/test_team_browser.py (uvicorn on 127.0.0.1, a free port, a temporary SQLite database).
"""

from __future__ import annotations

import pytest

from server import comments
from server.auth.accounts import add_user, list_users
from tests.browser.test_panel_editor_browser import CHROMIUM, CHROMIUM_ARGS, _playwright
from tests.browser.test_team_browser import PASSWORD, team_app  # noqa: F401 - fixture

pytestmark = pytest.mark.browser
XSS = "<b>bold?</b> <script>window.__pwned = 1</script>"


def test_reviewer_comments_on_a_panel(team_app):  # noqa: F811 - fixture
    sync_playwright, expect = _playwright()
    base, app, pid = team_app
    sessions = app.state.services.sessions
    add_user(sessions, name="carla", role="reviewer", password=PASSWORD)
    alice = next(u for u in list_users(sessions) if u.name == "alice")
    comments.add(sessions, project_id=pid, panel_tag="LP-1", slot=None, user=alice, body="engineer's note")
    url = f"{base}/projects/{pid}/panels/LP-1"

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            page = browser.new_context(viewport={"width": 1600, "height": 1200}).new_page()
            page.set_default_timeout(15_000)
            page.goto(url)
            page.fill('input[name="name"]', "carla")
            page.fill('input[name="password"]', PASSWORD)
            page.click('button[type="submit"]')
            page.wait_for_url(url)
            thread = page.locator("#comments")
            expect(thread.locator("#comment-list")).to_contain_text("engineer's note")  # loaded by htmx
            expect(thread.locator("button", has_text="Mark resolved")).to_have_count(0)  # not hers to resolve
            page.fill('#comment-form textarea[name="body"]', XSS)
            page.fill('#comment-form input[name="slot"]', "3")
            page.click('#comment-form button[type="submit"]')
            expect(page.locator("#comment-list li")).to_have_count(2)
            mine = page.locator("#comment-list li").nth(1)
            expect(mine.locator(".comment-body")).to_have_text(XSS)  # shown as typed: text, not markup
            expect(mine).to_contain_text("slot 3")
            assert page.evaluate("window.__pwned") is None
            mine.locator("button", has_text="Mark resolved").click()  # her own comment
            expect(page.locator("#comment-list li.resolved")).to_have_count(1)
            expect(page.locator("#comment-list li.resolved")).to_contain_text("resolved by carla")
        finally:
            browser.close()
