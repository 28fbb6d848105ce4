"""Balancing a transformer secondary on the web: each panel's feeder landing stored with the moves, one
edit, one audit row; undo puts the landings back; a stale preview is refused with 409.

Independent check (common practice: a cyclic landing A→B, B→C, C→A relabels a panel's phases):
three panels, each with 6 000 VA of locked line-to-neutral load on its own phase A (so no
in-panel move can help), balance the secondary perfectly only when landed 0, 1 and 2 steps
apart: 6 000 VA per phase, 6 000 / 120 = 50 A per line, instead of 18 000 VA (150 A) on A.
"""

from __future__ import annotations

from sqlalchemy import select

from server.db import models as db
from tests.helpers import assert_close
from tests.integration.web.html import parse

SYSTEM = "208Y/120 3PH 4W"


def _project() -> dict:
    def panel(tag: str) -> dict:
        return {
            "tag": tag,
            "system": SYSTEM,
            "fed_from": "T",
            "spaces": 12,
            "circuits": [
                {"slot": s, "va": 2000, "pf": 1.0, "locked": True, "description": f"load {s}"} for s in (1, 2, 7)
            ],
        }

    return {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "Secondary landing (invented)", "number": "SEC-1"},
        "sources": [{"tag": "S", "system": "480Y/277 3PH 4W"}],
        "transformers": [{"tag": "T", "kva": 45, "primary": "480 3PH 3W", "secondary": SYSTEM, "fed_from": "S"}],
        "panels": [panel("P1"), panel("P2"), panel("P3")],
    }


def _form(doc, form_id: str) -> dict[str, str]:
    form = doc.by_id(form_id)
    assert form is not None, f"no form #{form_id}"
    return {i.attrs["name"]: i.attrs.get("value", "") for i in form.find_all("input") if i.attrs.get("name")}


def _audit_rows(app, pid: int) -> list[tuple[str, str]]:
    with app.state.services.sessions() as s:
        return [
            (r.action, r.target)
            for r in s.execute(select(db.AuditEvent).where(db.AuditEvent.project_id == pid).order_by(db.AuditEvent.id))
            .scalars()
            .all()
        ]


def _rotations(client, pid: int) -> dict[str, int]:
    return {p["tag"]: p.get("feeder_rotation", 0) for p in client.get(f"/api/projects/{pid}").json()["panels"]}


def test_secondary_apply_stores_landings_in_one_edit_and_undo_restores_them(client, app):
    pid = app.state.services.import_file(_project()).project_id
    url = f"/projects/{pid}/transformers/T/balance"
    assert "secondary-balance-link" in client.get(f"/projects/{pid}/transformers/T").text
    before = client.get(f"/api/projects/{pid}/results").json()["transformers"]["T"]["secondary_line_amps"]
    assert_close(before["A"], 150.0, rel=1e-6)  # 18 000 VA / 120 V, everything on A

    r = client.get(url)
    assert r.status_code == 200
    doc = parse(r.text)
    loading = {
        tr.attrs["data-role"]: tr for tr in doc.by_id("balance-loading").find_all("tr") if "data-role" in tr.attrs
    }
    assert loading["max-phase"].find("td", data_col="before").text == "18,000"
    assert loading["max-phase"].find("td", data_col="after").text == "6,000"
    proposed = {
        tr.attrs["data-panel"]: tr.find("td", data_col="proposed").text
        for tr in doc.by_id("balance-landings").find_all("tr")
        if "data-panel" in tr.attrs
    }
    assert sorted(proposed.values()) == sorted(["A→A, B→B, C→C (as labelled)", "A→B, B→C, C→A", "A→C, B→A, C→B"])
    apply_form = _form(doc, "balance-apply-form")
    audit_before = _audit_rows(app, pid)

    r = client.post(f"{url}/apply", data=apply_form)
    assert r.status_code == 200, r.text
    doc = parse(r.text)
    assert "3 feeder landings changed" not in doc.by_id("balance-message").text  # one stays as labelled
    assert "2 feeder landings changed" in doc.by_id("balance-message").text
    rotations = _rotations(client, pid)
    assert sorted(rotations.values()) == [0, 1, 2]
    new_rows = _audit_rows(app, pid)[len(audit_before) :]
    assert new_rows == [("balance-secondary", "transformer T secondary")]  # ONE row for the whole edit
    history = client.get(f"/projects/{pid}/history")  # the row lists each changed landing as a field
    assert history.status_code == 200
    assert f"{next(t for t, r in rotations.items() if r == 2)} feeder_rotation" in history.text
    after = client.get(f"/api/projects/{pid}/results").json()
    for phase in "ABC":
        assert_close(after["transformers"]["T"]["secondary_line_amps"][phase], 50.0, rel=1e-6)
    rotated = next(tag for tag, rot in rotations.items() if rot == 1)
    assert "A→B, B→C, C→A" in parse(client.get(f"/projects/{pid}/panels/{rotated}").text).by_id("panel-summary").text

    # A second apply of the same (now stale) preview is refused; nothing is written.
    r = client.post(f"{url}/apply", data=apply_form)
    assert r.status_code == 409
    assert _rotations(client, pid) == rotations

    undo_form = _form(doc, "balance-undo-form")
    r = client.post(f"{url}/undo", data=undo_form)
    assert r.status_code == 200, r.text
    assert _rotations(client, pid) == {"P1": 0, "P2": 0, "P3": 0}
    assert _audit_rows(app, pid)[len(audit_before) :] == [
        ("balance-secondary", "transformer T secondary"),
        ("undo-secondary", "transformer T secondary"),
    ]
    again = client.get(f"/api/projects/{pid}/results").json()["transformers"]["T"]["secondary_line_amps"]
    assert_close(again["A"], 150.0, rel=1e-6)


def test_secondary_plan_with_a_bad_rotation_is_refused_naming_the_panel(client, app):
    pid = app.state.services.import_file(_project()).project_id
    url = f"/projects/{pid}/transformers/T/balance"
    form = _form(parse(client.get(url).text), "balance-apply-form")
    form["plan"] = '[{"panel": "P2", "feeder_rotation": 7, "moves": ""}]'
    r = client.post(f"{url}/apply", data=form)
    assert r.status_code == 422
    assert "P2" in r.text and "feeder_rotation must be 0, 1 or 2" in r.text
    assert _rotations(client, pid) == {"P1": 0, "P2": 0, "P3": 0}
    assert client.get(f"/projects/{pid}/transformers/NOPE/balance").status_code == 404
