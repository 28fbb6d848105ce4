"""Issued revisions: frozen content and hash, refused updates, and the comparison of two revisions.

The hash is SHA-256 (FIPS 180-4) of the frozen project file followed by its frozen results.
"""

from __future__ import annotations

import re

import pytest

from server import revisions as rev
from server.db.models import Revision


def _issue(client, pid: int, text: str) -> int:
    r = client.post(f"/projects/{pid}/revisions", data={"description": text}, follow_redirects=False)
    assert r.status_code == 303
    return int(r.headers["location"].rsplit("/", 1)[1])


def _leaf(app, pid):
    snap = app.state.services.snapshot(pid)
    for p in snap.model.panels:
        loads = [c for c in p.circuits if not c.feeds and c.poles == 1 and c.va]
        taken = {s for c in p.circuits for s in range(c.slot, c.slot + 2 * max(c.poles, 1), 2)}
        free = [s for s in range(1, p.spaces + 1) if s not in taken]
        if len(loads) >= 2 and free:
            return p.tag, loads, free
    raise AssertionError("the demo has no panel with two single-pole loads and a free slot")


def test_issued_hash_never_changes_after_further_edits(app, client, demo_id):
    svc = app.state.services
    n = _issue(client, demo_id, "Issued for permit")
    first = rev.get(svc, demo_id, n)
    assert first.intact
    assert first.summary.content_hash == rev.content_hash(*_stored(app, demo_id, n))
    tag, loads, _free = _leaf(app, demo_id)
    for i, c in enumerate(loads[:3]):
        svc.edit_circuit(demo_id, tag, c.slot, {"va": str((c.va or 0) + 100 + i)})
    again = rev.get(svc, demo_id, n)
    assert again.summary.content_hash == first.summary.content_hash
    assert again.project == first.project and again.results == first.results and again.intact
    page = client.get(f"/projects/{demo_id}/revisions/{n}").text
    assert first.summary.content_hash in page and "matches the stored content" in page
    assert client.get(f"/projects/{demo_id}/revisions/{n}/project.json").json() == first.project


def _stored(app, pid, n):
    with app.state.services.sessions() as s:
        row = s.query(Revision).filter_by(project_id=pid, number=n).one()
        return row.project_json, row.results_json


def test_service_layer_refuses_to_update_an_issued_revision(app, client, demo_id):
    n = _issue(client, demo_id, "Issued for bid")
    for column, value in (("description", "rewritten"), ("project_json", "{}"), ("content_hash", "0" * 64)):
        with pytest.raises(rev.RevisionFrozen, match="issued and cannot be changed"):
            with app.state.services.sessions() as s, s.begin():
                row = s.query(Revision).filter_by(project_id=demo_id, number=n).one()
                setattr(row, column, value)
    assert rev.get(app.state.services, demo_id, n).summary.description == "Issued for bid"


def test_comparison_lists_exactly_the_changed_circuits_and_the_load_change(app, client, demo_id):
    svc = app.state.services
    a = _issue(client, demo_id, "Issued for permit")
    tag, loads, free = _leaf(app, demo_id)
    changed, removed = loads[0], loads[1]
    added = free[0]
    svc.edit_circuit(demo_id, tag, changed.slot, {"va": str((changed.va or 0) + 1500)})
    svc.delete_circuit(demo_id, tag, removed.slot)
    svc.edit_circuit(
        demo_id, tag, added, {"description": "New receptacles", "category": "receptacle", "va": "900"}, create=True
    )
    b = _issue(client, demo_id, "Revised for owner comments")
    cmp_ = rev.compare(svc, demo_id, str(a), str(b))
    assert {(c.panel, c.slot, c.kind) for c in cmp_.circuits} == {
        (tag, changed.slot, "changed"),
        (tag, removed.slot, "removed"),
        (tag, added, "added"),
    }
    ch = next(c for c in cmp_.circuits if c.kind == "changed")
    assert ch.fields == ["va"]
    before = rev.get(svc, demo_id, a).results["panels"][tag]["demand_va"]
    after = rev.get(svc, demo_id, b).results["panels"][tag]["demand_va"]
    load = next(x for x in cmp_.loads if x.panel == tag)
    assert load.before_va == before and load.after_va == after and load.change_va == pytest.approx(after - before)
    assert after != before
    # The page lists the same three rows, nothing else.
    page = client.get(f"/projects/{demo_id}/revisions/compare?a={a}&b={b}").text
    assert sorted(re.findall(r'data-key="([^"]+)"', page)) == sorted(
        f"{tag}:{s}" for s in (changed.slot, removed.slot, added)
    )
    # Unchanged since revision b: nothing listed against the current project.
    assert rev.compare(svc, demo_id, str(b), rev.CURRENT).circuits == []


def test_unknown_revision_is_a_clear_404(client, demo_id):
    r = client.get(f"/projects/{demo_id}/revisions/99")
    assert r.status_code == 404 and "has no revision 99" in r.text
