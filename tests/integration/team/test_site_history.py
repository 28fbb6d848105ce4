"""The accounts-and-settings history (/admin/history): changes that belong to no project, for admins only.

An admin adds a user and changes a firm setting through the screens; both rows appear with who
and before/after, on no project's history; the filters (who, what, dates) and the CSV export
narrow the same way; no password material is ever shown or exported (OWASP ASVS 4.0.3 V7.1.1
"no credentials in logs", from memory); engineers and reviewers get 403 and an anonymous
browser is sent to sign in (RFC 9110 §15.5.4).
"""

from __future__ import annotations

import csv
import io
import json
import re
from datetime import UTC, datetime, timedelta

import pytest
from fastapi.testclient import TestClient

from server import audit, firm
from server.web.routes import history
from tests.integration.web.conftest import TEST_PASSWORD, sign_in

NEW_PASSWORD = "quiet-lantern-orchard"


@pytest.fixture
def admin(app) -> TestClient:
    c = TestClient(app, raise_server_exceptions=False)
    sign_in(c, app, "admin", "odile")
    return c


def _rows(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text)))


def _admin_changes(app, admin: TestClient) -> None:
    """Through the screens: add a reviewer, set her password, change one firm setting."""
    r = admin.post(
        "/admin/users", data={"name": "mireille", "role": "reviewer", "password": TEST_PASSWORD}, follow_redirects=False
    )
    assert r.status_code == 303, r.text
    r = admin.post(
        "/admin/users/mireille", data={"action": "password", "password": NEW_PASSWORD}, follow_redirects=False
    )
    assert r.status_code == 303, r.text
    form = {
        k: ("yes" if v is True else "" if v in (None, False) else str(v)) for k, v in firm.builtin_defaults().items()
    }
    form = {k: v for k, v in form.items() if v}
    form["vd_feeder_pct"] = "2.5"
    r = admin.post("/admin/settings", data=form, follow_redirects=False)
    assert r.status_code == 303, r.text


def test_account_and_firm_changes_are_listed_with_who_and_before_after(app, admin, demo_id):
    _admin_changes(app, admin)
    page = admin.get("/admin/history")
    assert page.status_code == 200
    table = page.text[page.text.index('id="history"') :]
    assert "create user mireille" in table and "update user mireille" in table
    assert "create firm settings" in table and "vd_feeder_pct" in table and "2.5" in table  # the first save
    # who: the signing-in admin, on every row she made
    lines = audit.events(app.state.services.sessions, project_id=None, site=True)
    mine = [e for e in lines if e.target in ("user mireille", "firm settings")]
    assert {e.user for e in mine} == {"odile"}
    settings_row = next(e for e in mine if e.target == "firm settings")
    assert settings_row.after["vd_feeder_pct"] == 2.5
    created = next(e for e in mine if e.action == "create" and e.target == "user mireille")
    assert created.after == {"name": "mireille", "role": "reviewer"} and created.before is None
    # newest first: the settings save came last
    assert lines[0].target == "firm settings"
    # on no project's history
    for url in (f"/projects/{demo_id}/history", f"/projects/{demo_id}/history.csv"):
        text = admin.get(url).text
        assert "mireille" not in text and "firm settings" not in text
    # project rows are not on the site history
    assert "create project" not in table
    # a removal keeps the account's name and role as "before"
    assert admin.post("/admin/users/mireille", data={"action": "remove"}, follow_redirects=False).status_code == 303
    removed = audit.events(app.state.services.sessions, project_id=None, site=True, limit=1)[0]
    assert (removed.user, removed.action, removed.target) == ("odile", "delete", "user mireille")
    assert removed.before == {"name": "mireille", "role": "reviewer"} and removed.after is None
    assert "delete user mireille" in admin.get("/admin/history").text


def test_no_password_material_on_the_page_or_in_the_csv(app, admin):
    _admin_changes(app, admin)
    page = admin.get("/admin/history").text
    export = admin.get("/admin/history.csv").text
    for text in (page, export):
        assert TEST_PASSWORD not in text and NEW_PASSWORD not in text
        assert "argon2" not in text and "password_hash" not in text and "password_changed_at" not in text
    row = next(r for r in _rows(export) if r["action"] == "update" and r["target"] == "user mireille")
    assert json.loads(row["after"]) == {"password": "changed"}


def test_filters_by_who_what_and_date(app, admin):
    _admin_changes(app, admin)
    other = TestClient(app, raise_server_exceptions=False)
    sign_in(other, app, "admin", "basile")
    assert (
        other.post(
            "/admin/users/mireille", data={"action": "role", "role": "engineer"}, follow_redirects=False
        ).status_code
        == 303
    )

    by_user = _rows(admin.get("/admin/history.csv?user=basile").text)
    assert [(r["user"], r["action"], r["target"]) for r in by_user] == [("basile", "update", "user mireille")]
    assert json.loads(by_user[0]["before"]) == {"role": "reviewer"}
    assert json.loads(by_user[0]["after"]) == {"role": "engineer"}

    settings_only = _rows(admin.get("/admin/history.csv?what=firm+settings").text)
    assert settings_only and {r["target"] for r in settings_only} == {"firm settings"}
    users_only = _rows(admin.get("/admin/history.csv?what=user").text)
    assert users_only and all(r["target"].startswith("user ") for r in users_only)
    page = admin.get("/admin/history?what=user").text
    table = page[page.index('id="history"') :]
    assert "firm settings" not in table and "update user mireille" in table

    today = datetime.now(UTC).date()
    assert len(_rows(admin.get(f"/admin/history.csv?since={today}&until={today}").text)) >= 4
    tomorrow = today + timedelta(days=1)
    assert _rows(admin.get(f"/admin/history.csv?since={tomorrow}").text) == []
    assert "No changes match" in admin.get(f"/admin/history?since={tomorrow}").text

    bad_date = admin.get("/admin/history?until=soon")
    assert bad_date.status_code == 422 and "to: &#39;soon&#39; is not a date" in bad_date.text
    bad_kind = admin.get("/admin/history.csv?what=circuit")
    assert bad_kind.status_code == 422 and "what: 'circuit' is not one of user, firm settings" in bad_kind.text
    assert admin.get("/admin/history?page=x").status_code == 422

    export = admin.get("/admin/history.csv")
    assert export.headers["content-type"].startswith("text/csv")
    assert 'filename="accounts-settings-history.csv"' in export.headers["content-disposition"]


def test_pages_newest_first_and_keep_the_filters(app, admin, monkeypatch):
    monkeypatch.setattr(history, "SITE_PAGE_SIZE", 2)
    _admin_changes(app, admin)  # with the signed-in admin's own account: at least 4 rows
    total = audit.count(app.state.services.sessions, project_id=None, site=True)
    assert total >= 4
    first = admin.get("/admin/history?what=user&page=1")
    users_total = audit.count(
        app.state.services.sessions, project_id=None, site=True, filt=audit.AuditFilter(kind="user")
    )
    assert f"Page 1 of {-(-users_total // 2)}" in first.text
    older = re.search(r'href="([^"]+)" rel="next"', first.text).group(1).replace("&amp;", "&")
    assert "what=user" in older and "page=2" in older
    second = admin.get(older)
    assert second.status_code == 200 and 'rel="prev"' in second.text
    ids_1 = [e.id for e in audit.events(app.state.services.sessions, project_id=None, site=True, limit=2)]
    ids_2 = [e.id for e in audit.events(app.state.services.sessions, project_id=None, site=True, limit=2, offset=2)]
    assert not set(ids_1) & set(ids_2)
    assert len(_rows(admin.get("/admin/history.csv").text)) == total  # the export is never paged


@pytest.mark.parametrize("role", ["engineer", "reviewer"])
def test_only_admins(app, role):
    c = TestClient(app, raise_server_exceptions=False)
    sign_in(c, app, role)
    assert c.get("/admin/history").status_code == 403
    assert c.get("/admin/history.csv").status_code == 403
    assert 'id="site-history-link"' not in c.get("/").text


def test_anonymous_is_sent_to_sign_in(app):
    anon = TestClient(app)
    for url in ("/admin/history", "/admin/history.csv"):
        r = anon.get(url, follow_redirects=False)
        assert r.status_code == 303 and r.headers["location"].startswith("/login?next=")


def test_linked_from_the_admin_pages_and_the_user_menu(admin):
    assert 'href="/admin/history" id="site-history-link"' in admin.get("/").text
    assert 'href="/admin/history?what=user"' in admin.get("/admin/users").text
    assert 'href="/admin/history?what=firm+settings"' in admin.get("/admin/settings").text


def test_a_change_made_from_the_shell_is_listed_under_its_cli_name(app, admin):
    from server.auth.accounts import set_role

    sign_in(TestClient(app), app, "reviewer", "gaspard")
    set_role(app.state.services.sessions, name="gaspard", role="engineer")  # what `panelwright user role` calls
    row = _rows(admin.get("/admin/history.csv?what=user").text)[0]
    assert row["user"] == audit.ACTOR.get() and row["user"].startswith("cli")
    assert (row["action"], row["target"], json.loads(row["after"])) == ("update", "user gaspard", {"role": "engineer"})
