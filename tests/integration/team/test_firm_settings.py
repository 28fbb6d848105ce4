"""Firm settings (admin): the defaults a new project starts with, checked by the project file's rules, audited.

The limits saved here are the project header's own (NEC 215.2(A)(2) Informational Note No. 2
recommends 3 % feeder / 5 % total voltage drop: NFPA 70-2023, from memory); the tests only
check that the values travel from the settings into a new project, not the engineering.
"""

from __future__ import annotations

import re

from fastapi.testclient import TestClient
from sqlalchemy import func, select

from server import audit, firm
from server.db import models as db
from tests.integration.web.conftest import sign_in

GOOD = {
    "firm": "Halvorsen & Pike Consulting Engineers",  # invented
    "paper": "letter-landscape",
    "code": "NEC-2020",
    "occupancy": "school",
    "include_future": "true",
    "vd_feeder_pct": "2",
    "vd_total_pct": "4.5",
    "imbalance_limit_pct": "15",
    "growth_margin_pct": "30",
}


def _admin(app) -> TestClient:
    c = TestClient(app, raise_server_exceptions=False)
    sign_in(c, app, "admin")
    return c


def _firm_rows(app) -> int:
    with app.state.services.sessions() as s:
        return s.scalar(select(func.count()).select_from(db.FirmSettings))


def test_admin_saves_settings_and_a_new_project_starts_from_them(app):
    admin = _admin(app)
    page = admin.get("/admin/settings")
    assert page.status_code == 200
    assert 'name="vd_feeder_pct" value="3"' in page.text  # the project file's defaults until first saved
    r = admin.post("/admin/settings", data=GOOD, follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"] == "/admin/settings?saved=true"
    shown = admin.get("/admin/settings").text
    assert 'value="Halvorsen &amp; Pike Consulting Engineers"' in shown
    assert 'name="vd_total_pct" value="4.5"' in shown

    form = admin.get("/").text  # the new-project form pre-selects the firm's code edition and occupancy
    new_form = form[form.index('id="new-project"') :]
    assert re.search(r'<option value="NEC-2020" selected>', new_form)
    assert re.search(r'<option value="school" selected>', new_form)
    assert "new projects: <strong>NEC-2020</strong>" in form  # the header outside a project says so too

    r = admin.post("/projects", data={"name": "Library annex", "number": "26-014"}, follow_redirects=False)
    assert r.status_code == 303
    pid = int(r.headers["location"].split("/")[2])
    info = app.state.services.snapshot(pid).info
    assert info.firm == GOOD["firm"] and info.paper == "letter-landscape"
    assert (info.code.value, info.occupancy.value, info.include_future) == ("NEC-2020", "school", True)
    assert (info.vd_feeder_pct, info.vd_total_pct, info.imbalance_limit_pct, info.growth_margin_pct) == (
        2.0,
        4.5,
        15.0,
        30.0,
    )


def test_the_new_project_form_wins_over_the_firm_defaults(app, client):
    firm.save(app.state.services.sessions, firm.from_form(GOOD))
    r = client.post(
        "/projects",
        data={"name": "Clinic fit-out", "number": "", "code": "NEC-2023", "occupancy": "hospital"},
        follow_redirects=False,
    )
    assert r.status_code == 303, r.text
    info = app.state.services.snapshot(int(r.headers["location"].split("/")[2])).info
    assert (info.code.value, info.occupancy.value) == ("NEC-2023", "hospital")
    assert info.firm == GOOD["firm"] and info.vd_feeder_pct == 2.0  # not on the form: the firm's


def test_import_and_existing_projects_are_not_touched(app, demo_data, demo_id):
    before = app.state.services.export_file(demo_id)
    firm.save(app.state.services.sessions, firm.from_form(GOOD))
    assert app.state.services.export_file(demo_id) == before
    copy = dict(demo_data, project=dict(demo_data["project"], number="other-number"))
    imported = app.state.services.import_file(copy).project_id
    assert app.state.services.snapshot(imported).info.firm == demo_data["project"].get("firm", "")


def test_bad_values_come_back_beside_their_fields_and_nothing_is_written(app):
    admin = _admin(app)
    bad = dict(GOOD, vd_feeder_pct="0", paper="A0-sideways", imbalance_limit_pct="lots")
    r = admin.post("/admin/settings", data=bad)
    assert r.status_code == 422
    text = r.text
    assert "Not saved" in text
    # each message sits in its own field's box (the rules are the project file's: > 0, a listed paper, a number)
    for name, words in (
        ("vd_feeder_pct", "must be greater than 0"),
        ("paper", "is not one of"),
        ("imbalance_limit_pct", "must be a number"),
    ):
        box = text[text.index(f'id="f-{name}"') :]
        box = box[: box.index("</div>")]
        assert words in box, (name, box)
    assert 'value="Halvorsen &amp; Pike Consulting Engineers"' in text  # the other typed values kept
    assert 'name="vd_total_pct" value="4.5"' in text
    assert 'name="include_future" value="true" checked' in text
    assert _firm_rows(app) == 0
    assert audit.events(app.state.services.sessions, project_id=None, target=firm.AUDIT_TARGET) == []


def test_a_refused_change_keeps_the_saved_settings(app):
    admin = _admin(app)
    assert admin.post("/admin/settings", data=GOOD, follow_redirects=False).status_code == 303
    r = admin.post("/admin/settings", data=dict(GOOD, firm="X" * 201, vd_total_pct="9"))
    assert r.status_code == 422 and "longer than 200 characters" in r.text
    assert firm.load(app.state.services.sessions)["vd_total_pct"] == 4.5  # the valid field was not written either


def test_a_form_drawn_before_another_admins_save_is_refused_with_409(app):
    first = _admin(app)
    second = TestClient(app, raise_server_exceptions=False)
    sign_in(second, app, "admin", "ottilie")
    drawn = re.search(r'name="version" value="([0-9a-f]+)"', first.get("/admin/settings").text).group(1)
    assert second.post("/admin/settings", data=GOOD, follow_redirects=False).status_code == 303
    mine = dict(GOOD, firm="Brackwater Design Group", version=drawn)  # invented
    r = first.post("/admin/settings", data=mine)
    assert r.status_code == 409
    assert "changed by ottilie" in r.text and "nothing was saved" in r.text
    assert 'value="Brackwater Design Group"' in r.text  # my typing kept
    assert firm.load(app.state.services.sessions)["firm"] == GOOD["firm"]  # theirs stands
    again = re.search(r'name="version" value="([0-9a-f]+)"', r.text).group(1)
    assert first.post("/admin/settings", data=dict(mine, version=again), follow_redirects=False).status_code == 303
    assert firm.load(app.state.services.sessions)["firm"] == "Brackwater Design Group"


def test_engineer_and_reviewer_get_403_anonymous_the_sign_in_page(app):
    for role in ("engineer", "reviewer"):
        c = TestClient(app, raise_server_exceptions=False)
        sign_in(c, app, role)
        assert c.get("/admin/settings").status_code == 403
        assert c.post("/admin/settings", data=GOOD).status_code == 403
        assert "/admin/settings" not in c.get("/").text  # no link in the menu
    assert _firm_rows(app) == 0
    anon = TestClient(app, raise_server_exceptions=False)
    r = anon.get("/admin/settings", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/login?next=")


def test_admins_find_the_page_from_the_menu_and_the_users_page(app):
    admin = _admin(app)
    assert 'href="/admin/settings"' in admin.get("/").text
    assert 'href="/admin/settings"' in admin.get("/admin/users").text


def test_each_save_is_audited_with_who_and_before_after(app):
    admin = _admin(app)
    admin.post("/admin/settings", data=GOOD)
    admin.post("/admin/settings", data=dict(GOOD, vd_feeder_pct="2.5"))
    admin.post("/admin/settings", data=dict(GOOD, vd_feeder_pct="2.5"))  # no change: no row
    lines = audit.events(app.state.services.sessions, project_id=None, target=firm.AUDIT_TARGET)
    assert [(e.user, e.action) for e in lines] == [("admin", "update"), ("admin", "create")]
    assert lines[0].before == {"vd_feeder_pct": 2.0} and lines[0].after == {"vd_feeder_pct": 2.5}
    assert lines[1].after["firm"] == GOOD["firm"] and lines[1].project_id is None
    page = admin.get("/admin/settings").text
    history = page[page.index('id="firm-history"') :]
    assert "Feeder voltage drop limit (%)" in history and "2.5" in history and "admin" in history


def _cli(monkeypatch, db_url: str, args: list[str]):
    from click.testing import CliRunner

    from server.cli import cli

    monkeypatch.setenv("PANELWRIGHT_DATABASE_URL", db_url)
    return CliRunner().invoke(cli, ["settings", *args])


def test_cli_show_and_set(monkeypatch, app, db_url):
    r = _cli(monkeypatch, db_url, ["show"])
    assert r.exit_code == 0, r.output
    assert "vd_feeder_pct\t3\n" in r.output and "paper\ttabloid-landscape\n" in r.output
    r = _cli(monkeypatch, db_url, ["set", "firm", "Tamsin Okafor Electrical"])  # invented
    assert r.exit_code == 0, r.output
    r = _cli(monkeypatch, db_url, ["set", "growth-margin-pct", "40"])
    assert r.exit_code == 0 and "growth_margin_pct: 25 -> 40" in r.output
    saved = firm.load(app.state.services.sessions)
    assert saved["firm"] == "Tamsin Okafor Electrical" and saved["growth_margin_pct"] == 40.0
    lines = audit.events(app.state.services.sessions, project_id=None, target=firm.AUDIT_TARGET)
    assert lines[0].user.startswith("cli") and lines[0].after == {"growth_margin_pct": 40.0}


def test_cli_refuses_bad_keys_and_values_with_status_2(monkeypatch, app, db_url):
    r = _cli(monkeypatch, db_url, ["set", "colour", "teal"])
    assert r.exit_code == 2 and "unknown setting 'colour'" in r.output and "vd_total_pct" in r.output
    r = _cli(monkeypatch, db_url, ["set", "code", "NEC-1999"])
    assert r.exit_code == 2 and "code not changed" in r.output and "NEC-2023" in r.output
    r = _cli(monkeypatch, db_url, ["set", "vd_total_pct", "-1"])
    assert r.exit_code == 2 and "must be greater than 0" in r.output
    assert _firm_rows(app) == 0
