"""The audit trail and the history views: who, when, what (before/after), filters, CSV export."""

from __future__ import annotations

import csv
import io
import json
from datetime import UTC, datetime, timedelta

from server import audit


def _load(app, pid):
    snap = app.state.services.snapshot(pid)
    for p in snap.model.panels:
        for c in p.circuits:
            if not c.feeds and c.poles == 1 and c.va:
                return p.tag, c
    raise AssertionError("no load circuit in the demo")


def test_an_edit_records_who_when_and_before_after(app, client, demo_id):
    tag, c = _load(app, demo_id)
    t0 = datetime.now(UTC) - timedelta(seconds=1)
    r = client.post(
        f"/projects/{demo_id}/panels/{tag}/circuits/{c.slot}",
        data={"va": "4321"},
        headers={"HX-Request": "true", "HX-Trigger-Name": "va"},
    )
    assert r.status_code == 200
    lines = audit.events(app.state.services.sessions, project_id=demo_id)
    e = lines[0]
    assert (e.user, e.action, e.panel, e.target) == ("engineer", "update", tag, f"{tag} circuit {c.slot}")
    assert e.before == {"va": c.va} and e.after == {"va": 4321.0}
    assert e.at >= t0
    page = client.get(f"/projects/{demo_id}/panels/{tag}/history").text
    assert "4321" in page and f"{tag} circuit {c.slot}" in page


def test_import_is_one_create_row_not_one_per_circuit(app, demo_id):
    lines = audit.events(app.state.services.sessions, project_id=demo_id)
    assert [(e.action, e.target.split()[0]) for e in lines] == [("create", "project")]


def test_history_filters_by_user_panel_and_date(app, client, demo_id):
    from fastapi.testclient import TestClient

    from tests.integration.web.conftest import sign_in

    svc = app.state.services
    snap = svc.snapshot(demo_id)
    panels = [p for p in snap.model.panels if any(not c.feeds for c in p.circuits)][:2]
    other = TestClient(app)
    sign_in(other, app, "engineer", "ingrid")
    for who, p in ((client, panels[0]), (other, panels[1])):
        c = next(c for c in p.circuits if not c.feeds)
        assert who.post(
            f"/projects/{demo_id}/panels/{p.tag}/circuits/{c.slot}", data={"notes": "checked"}
        ).status_code in (200, 303)
    by_user = client.get(f"/projects/{demo_id}/history.csv?user=ingrid").text
    rows = list(csv.DictReader(io.StringIO(by_user)))
    assert [r["user"] for r in rows] == ["ingrid"] and rows[0]["panel"] == panels[1].tag
    by_panel = list(
        csv.DictReader(io.StringIO(client.get(f"/projects/{demo_id}/history.csv?panel={panels[0].tag}").text))
    )
    assert {r["panel"] for r in by_panel} == {panels[0].tag}
    assert json.loads(by_panel[0]["after"]) == {"notes": "checked"}
    today = datetime.now(UTC).date()
    assert (
        len(
            list(
                csv.DictReader(
                    io.StringIO(client.get(f"/projects/{demo_id}/history.csv?since={today}&until={today}").text)
                )
            )
        )
        >= 3
    )
    tomorrow = today + timedelta(days=1)
    assert list(csv.DictReader(io.StringIO(client.get(f"/projects/{demo_id}/history.csv?since={tomorrow}").text))) == []
    bad = client.get(f"/projects/{demo_id}/history?since=yesterday")
    assert bad.status_code == 422 and "from: &#39;yesterday&#39; is not a date" in bad.text
    export = client.get(f"/projects/{demo_id}/history.csv")
    assert export.headers["content-type"].startswith("text/csv")
    assert "attachment" in export.headers["content-disposition"]


def test_csv_neutralises_spreadsheet_formulas():
    line = audit.AuditLine(1, datetime.now(UTC), "=cmd", 1, "=P", "update", "=T", {"a": 1}, {"a": 2})
    row = list(csv.reader(io.StringIO(audit.to_csv([line]))))[1]
    assert row[1] == "'=cmd" and row[3] == "'=P" and row[4] == "'=T"


def test_account_changes_are_audited_without_the_hash(app):
    from server.auth.accounts import add_user, set_password
    from tests.integration.web.conftest import TEST_PASSWORD

    add_user(app.state.services.sessions, name="jules", role="reviewer", password=TEST_PASSWORD)
    set_password(app.state.services.sessions, name="jules", password=TEST_PASSWORD + "!")
    lines = [e for e in audit.events(app.state.services.sessions, project_id=None) if e.target == "user jules"]
    assert [e.action for e in lines] == ["update", "create"]
    assert lines[0].after == {"password": "changed"}
    assert "argon2" not in json.dumps([e.before for e in lines] + [e.after for e in lines])


def test_project_history_pages_through_every_change(app, client, demo_id, monkeypatch):
    # A busy project's history was cut at the newest 500; now every change is a page away.
    import re

    from server.web.routes import history

    monkeypatch.setattr(history, "LIMIT", 3)
    tag, c = _load(app, demo_id)
    for va in (1111, 2222, 3333, 4444, 5555):
        r = client.post(
            f"/projects/{demo_id}/panels/{tag}/circuits/{c.slot}",
            data={"va": str(va)},
            headers={"HX-Request": "true", "HX-Trigger-Name": "va"},
        )
        assert r.status_code == 200
    total = len(audit.events(app.state.services.sessions, project_id=demo_id, limit=0))
    first = client.get(f"/projects/{demo_id}/history?user=engineer")
    assert first.status_code == 200 and "Page 1 of" in first.text and 'rel="next"' in first.text
    assert "5555" in first.text and "1111" not in first.text
    older = re.search(r'href="([^"]+)" rel="next"', first.text).group(1).replace("&amp;", "&")
    assert "user=engineer" in older and "page=2" in older  # the filters stay with the pages
    second = client.get(older)
    assert "Page 2 of" in second.text and "2222" in second.text and "5555" not in second.text
    assert client.get(f"/projects/{demo_id}/history?page=0").status_code == 422
    assert f"({total} changes" in client.get(f"/projects/{demo_id}/history").text
    # A panel's own history pages the same way.
    assert "Page 1 of 2" in client.get(f"/projects/{demo_id}/panels/{tag}/history").text
