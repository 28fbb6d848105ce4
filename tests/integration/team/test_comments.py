"""Review comments on panels: who may write and resolve them, escaping, the audit trail, bad input.

Roles per docs/lan.md (reviewer: read, comment, compare); status codes RFC 9110 §15.
Escaping: OWASP XSS Prevention Cheat Sheet, rule 1 (HTML-encode text in element content), from memory.
"""

from __future__ import annotations

import re

from fastapi.testclient import TestClient

from server import audit
from server.comments import MAX_BODY
from tests.integration.team.test_security import _browser, _samples
from tests.integration.web.html import parse

XSS = '<script>alert("x")</script><img src=x onerror=alert(1)>'


def _thread(pid: int, tag: str) -> str:
    return f"/projects/{pid}/panels/{tag}/comments"


def _ids(html: str) -> list[int]:
    return [int(x) for x in re.findall(r'id="comment-(\d+)"', html)]


def test_reviewer_comments_but_still_cannot_edit(app, demo_id):
    s = _samples(app, demo_id)
    rev = _browser(app, "reviewer")
    r = rev.post(
        _thread(demo_id, s["tag"]), data={"body": "Check the kitchen load", "slot": s["slot"]}, follow_redirects=False
    )
    assert r.status_code == 303 and r.headers["location"].endswith(f"/panels/{s['tag']}#comments")
    r = rev.post(_thread(demo_id, s["tag"]), data={"body": "Whole panel note"}, headers={"HX-Request": "true"})
    assert r.status_code == 200
    doc = parse(r.text)
    assert "Check the kitchen load" in doc.by_id("comment-list").text and f"slot {s['slot']}" in r.text
    assert len(_ids(r.text)) == 2
    # still read-only for the project itself
    edit = rev.post(
        f"/projects/{demo_id}/panels/{s['tag']}/circuits/{s['slot']}",
        data={"description": "reviewer edit"},
        headers={"HX-Request": "true", "HX-Trigger-Name": "description"},
    )
    assert edit.status_code == 403
    assert rev.post(f"/projects/{demo_id}/panels/{s['tag']}", data={"description": "x"}).status_code == 403
    assert rev.put(f"/api/projects/{demo_id}", json={}).status_code == 403
    # the panel page loads the thread; the project's open comments list both
    page = rev.get(f"/projects/{demo_id}/panels/{s['tag']}").text
    assert parse(page).by_id("comments-link") is not None
    listing = rev.get(f"/projects/{demo_id}/comments")
    assert listing.status_code == 200 and "Whole panel note" in parse(listing.text).by_id("open-comments").text
    assert parse(rev.get(f"/projects/{demo_id}/warnings").text).by_id("open-comments-link") is not None


def test_anonymous_is_sent_to_sign_in(app, demo_id):
    s = _samples(app, demo_id)
    anon = _browser(app, "anonymous")
    r = anon.post(_thread(demo_id, s["tag"]), data={"body": "drive-by"}, follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/login?next=")
    assert anon.get(_thread(demo_id, s["tag"]), follow_redirects=False).status_code == 303
    r = anon.get(_thread(demo_id, s["tag"]), headers={"HX-Request": "true"}, follow_redirects=False)
    assert r.status_code == 401
    assert TestClient(app).get(f"/projects/{demo_id}/comments", follow_redirects=False).status_code == 303


def test_comment_text_comes_back_escaped(app, demo_id):
    s = _samples(app, demo_id)
    rev = _browser(app, "reviewer")
    assert rev.post(_thread(demo_id, s["tag"]), data={"body": XSS}, follow_redirects=False).status_code == 303
    for url in (_thread(demo_id, s["tag"]), f"/projects/{demo_id}/comments", f"/projects/{demo_id}/history"):
        text = rev.get(url).text
        assert "<script>alert" not in text and "<img src=x" not in text
        assert "&lt;script&gt;alert(" in text and "&lt;img src=x onerror=alert(1)&gt;" in text


def test_resolve_by_author_or_engineer_only(app, demo_id):
    s = _samples(app, demo_id)
    url = _thread(demo_id, s["tag"])
    first, second = _browser(app, "reviewer"), _browser(app, "reviewer")
    from tests.integration.web.conftest import sign_in

    sign_in(second, app, "reviewer", name="second-reviewer")
    first.post(url, data={"body": "mine"})
    first.post(url, data={"body": "also mine"})
    a, b = _ids(first.get(url).text)
    resolve = f"/projects/{demo_id}/comments/{{}}/resolve"
    assert second.post(resolve.format(a)).status_code == 403  # another reviewer's comment
    assert 'action="' + resolve.format(a) + '"' not in second.get(url).text  # and no button for it
    assert first.post(resolve.format(a), follow_redirects=False).status_code == 303  # its author
    eng = _browser(app, "engineer")
    r = eng.post(resolve.format(b), headers={"HX-Request": "true"})
    assert r.status_code == 200 and "resolved by engineer" in r.text
    assert first.post(resolve.format(999999)).status_code == 404
    assert "mine" not in first.get(f"/projects/{demo_id}/comments").text  # nothing open any more
    lines = audit.events(app.state.services.sessions, project_id=demo_id, filt=audit.AuditFilter(panel=s["tag"]))
    comment_rows = [e for e in lines if e.target.startswith("comment")]
    assert {e.action for e in comment_rows} == {"create", "update"}
    assert not any(e.user == "second-reviewer" for e in lines)  # the refused resolve recorded nothing
    assert any(e.action == "update" and e.after and e.after.get("resolved_by") == "engineer" for e in comment_rows)


def test_bad_comments_are_refused_with_the_field_named(app, demo_id):
    s = _samples(app, demo_id)
    rev = _browser(app, "reviewer")
    url = _thread(demo_id, s["tag"])
    r = rev.post(url, data={"body": "   "})
    assert r.status_code == 422 and "body" in parse(r.text).by_id("comment-error").text
    r = rev.post(url, data={"body": "x" * (MAX_BODY + 1)})
    assert r.status_code == 422 and str(MAX_BODY) in parse(r.text).by_id("comment-error").text
    r = rev.post(url, data={"body": "keep this text", "slot": "999"})
    assert r.status_code == 422 and "slot" in r.text and "keep this text" in r.text
    r = rev.post(url, data={"body": "keep", "slot": "two"})
    assert r.status_code == 422 and "not a slot number" in r.text
    assert rev.post(_thread(demo_id, "NO-SUCH-PANEL"), data={"body": "x"}).status_code == 404
    assert _ids(rev.get(url).text) == []  # nothing was stored
    assert rev.post(url, data={"body": "x" * MAX_BODY}).status_code == 200  # the limit itself is fine


def test_comment_needs_csrf(app, demo_id):
    s = _samples(app, demo_id)
    rev = _browser(app, "reviewer")
    rev.headers.pop("X-CSRF-Token")
    assert rev.post(_thread(demo_id, s["tag"]), data={"body": "no token"}).status_code == 403
