"""Load growth, headroom and what-if over HTTP on a migrated store (SQLite, and PostgreSQL when configured).

* The growth series of the demo across three issued revisions and the working copy equals the
  engine's own results of each frozen project file, without and with future loads.
* What-if then apply gives the same project and results as the same circuit typed into the
  panel editor.
"""

from __future__ import annotations

import json

from server.calc import projectfile as pf
from server.calc.engine import compute_project
from server.growth import Growth, node_values
from tests.helpers import assert_close
from tests.integration.web.conftest import htmx
from tests.integration.web.html import parse


def _three_revisions(app, pid: int) -> None:
    """Rev 1 as imported; rev 2 after a VA change on LP-1; rev 3 after a future load on LP-2; then a working edit."""
    from server import revisions  # the team's issue path (it calls Services.issue_revision)

    svc = app.state.services
    revisions.issue(svc, pid, description="Issued for review", issued_by="AB")
    svc.edit_circuit(pid, "LP-1", 1, {"va": "4200"})
    revisions.issue(svc, pid, description="Tenant changes", issued_by="AB")
    lp2 = svc.snapshot(pid).model.panel("LP-2")
    free = next(s for s in range(1, lp2.spaces + 1, 2) if lp2.circuit_at(s) is None and s not in _covered(lp2))
    svc.edit_circuit(
        pid,
        "LP-2",
        free,
        {"description": "Future kiosk", "category": "equipment", "va": "3000", "status": "future"},
        create=True,
    )
    revisions.issue(svc, pid, description="Future kiosk shown", issued_by="AB")
    svc.edit_circuit(pid, "LP-1", 1, {"va": "5000"})


def _covered(panel) -> set[int]:
    from server.calc.systems import breaker_slots

    out: set[int] = set()
    for c in panel.circuits:
        out.update(breaker_slots(c.slot, c.poles) if c.poles else (c.slot,))
    return out


def test_growth_series_equals_the_engine_for_each_snapshot(app, demo_id):
    _three_revisions(app, demo_id)
    g = Growth(app.state.services)
    points = g.points(demo_id)
    assert [p.label for p in points] == ["Rev 1", "Rev 2", "Rev 3", "Working copy"]
    with app.state.services.sessions() as s:
        from server.repo import projects as repo

        frozen = [(r.number, r.project_json, r.results_json) for r in repo.list_revisions(s, project_id=demo_id)]
    files = [json.loads(text) for _, text, _ in frozen] + [pf.dump_project(app.state.services.snapshot(demo_id).model)]
    tags = [*(p["tag"] for p in files[-1]["panels"]), *(t["tag"] for t in files[-1]["transformers"]), "UTIL"]
    for point, data in zip(points, files, strict=True):
        model = pf.parse_project(data)
        without = compute_project(model, include_future=False)
        with_future = compute_project(model, include_future=True)
        for tag in tags:
            assert node_values(point.result, point.result_future, tag) == node_values(without, with_future, tag), (
                point.label,
                tag,
            )
    # The frozen results of each revision (the project's own include_future setting, off in the demo) agree too.
    for (number, _pj, results_json), point in zip(frozen, points, strict=False):
        stored = json.loads(results_json)
        for tag, pr in stored["panels"].items():
            assert_close(point.result.panels[tag].demand_va, pr["demand_va"], rel=1e-6, what=f"rev {number} {tag}")
    # The future band of LP-2 grows by the 3 000 VA future load of rev 3 (equipment at 100 %).
    lp2 = g.series(demo_id, "LP-2", points)
    rev2, rev3 = lp2.values[1], lp2.values[2]
    band2 = rev2.demand_future_kva - rev2.demand_kva
    assert_close(rev3.demand_future_kva - rev3.demand_kva - band2, 3.0, rel=1e-6)
    assert_close(rev3.demand_kva, rev2.demand_kva, rel=1e-9)  # without future loads: unchanged


def test_dashboard_lists_nodes_closest_to_their_limits_with_growth(client, app, demo_id):
    _three_revisions(app, demo_id)
    doc = parse(client.get(f"/projects/{demo_id}/growth").text)
    rows = doc.by_id("closest-to-limit").find_all("tr")
    rows = [r for r in rows if "data-tag" in r.attrs]
    used = [float(r.attrs["data-used"]) for r in rows]
    assert used == sorted(used, reverse=True) and len(rows) == 11  # 7 panels + 4 transformers
    lp1 = next(r for r in rows if r.attrs["data-tag"] == "LP-1")
    first = Growth(app.state.services).points(demo_id)[0].result.panels["LP-1"].demand_va / 1000
    now = app.state.services.snapshot(demo_id).result.panels["LP-1"].demand_va / 1000
    assert_close(float(lp1.find("td", data_role="growth").text), now - first, abs_=0.051)
    assert "CAUTION" not in doc.text and "engineer of record" in doc.text


def test_transformer_page_has_the_svg_chart_and_headroom(client, app, demo_id):
    app.state.services.issue_revision(demo_id, description="Rev 1", issued_by="AB")
    r = client.get(f"/projects/{demo_id}/growth/nodes/T-1")
    assert r.status_code == 200
    doc = parse(r.text)
    chart = doc.by_id("growth-chart")
    assert chart.find("svg") is not None
    assert doc.by_id("headroom").find("strong", data_role="binding").text
    svg = client.get(f"/projects/{demo_id}/growth/nodes/T-1/chart.svg")
    assert svg.status_code == 200 and svg.headers["content-type"].startswith("image/svg+xml")
    assert svg.text.startswith("<svg") and "Load growth of T-1" in svg.text
    assert client.get(f"/projects/{demo_id}/growth/nodes/NOPE").status_code == 404


def _results_without_ids(snap) -> dict:
    return snap.result.to_json()


def test_whatif_then_apply_equals_a_direct_edit(client, app, demo_id, demo_data):
    svc = app.state.services
    other = dict(demo_data)
    other["project"] = dict(demo_data["project"], number=demo_data["project"]["number"] + "-B")
    other_id = svc.import_file(other).project_id
    before = svc.snapshot(demo_id)
    query = {"kva": "2.4", "category": "receptacle", "poles": "1", "description": "Added receptacles"}
    r = client.get(f"/projects/{demo_id}/growth/nodes/LP-2/whatif", params=query, headers=htmx())
    assert r.status_code == 200
    doc = parse(r.text)
    result = doc.by_id("whatif-preview-result")
    slot = int(result.attrs["data-slot"])
    # Nothing saved by the preview.
    assert svc.snapshot(demo_id).data_version == before.data_version
    previewed = {
        row.attrs["data-tag"]: float(row.find("td", data_role="demand-after").text.replace(",", ""))
        for row in doc.by_id("whatif-changes").find_all("tr")
        if "data-tag" in row.attrs
    }
    assert set(previewed) >= {"LP-2", "T-2", "MDP", "UTIL"}
    # Apply (a POST with the previewed slot), then the same circuit typed directly on the copy.
    r = client.post(
        f"/projects/{demo_id}/growth/nodes/LP-2/whatif", data={**query, "slot": str(slot)}, follow_redirects=False
    )
    assert r.status_code == 303 and r.headers["location"].endswith(f"/panels/LP-2#slot-{slot}")
    applied = svc.snapshot(demo_id)
    circuit = applied.model.panel("LP-2").circuit_at(slot)
    assert circuit is not None and circuit.va == 2400.0 and circuit.description == "Added receptacles"
    direct = svc.edit_circuit(
        other_id,
        "LP-2",
        slot,
        {
            "description": "Added receptacles",
            "category": "receptacle",
            "poles": "1",
            "va": "2400",
            "breaker_amps": str(circuit.breaker_amps),
            "status": "new",
        },
        create=True,
    )
    assert _results_without_ids(applied) == _results_without_ids(direct)
    a, b = pf.dump_project(applied.model), pf.dump_project(direct.model)
    a["project"]["number"] = b["project"]["number"]
    assert a == b
    for tag, kva in previewed.items():
        got = applied.result.panels.get(tag) or applied.result.transformers.get(tag) or applied.result.sources[tag]
        demand = getattr(got, "demand_va", None)
        demand = demand / 1000 if demand is not None else got.load_kva
        assert_close(kva, demand, abs_=0.006, what=f"preview vs applied {tag}")


def test_whatif_bad_input_is_named_and_nothing_saved(client, app, demo_id):
    before = app.state.services.snapshot(demo_id).data_version
    r = client.get(
        f"/projects/{demo_id}/growth/nodes/LP-2/whatif", params={"kva": "lots", "category": "equipment", "poles": "1"}
    )
    assert r.status_code == 422
    assert "kva" in parse(r.text).by_id("whatif-errors").text
    r = client.post(
        f"/projects/{demo_id}/growth/nodes/LP-2/whatif",
        data={"kva": "1", "category": "equipment", "poles": "1", "slot": "1"},
    )
    assert r.status_code == 422  # slot 1 is taken
    assert app.state.services.snapshot(demo_id).data_version == before


def test_panel_and_transformer_pages_link_to_their_growth_page(client, demo_id):
    for kind, tag in (("panels", "LP-1"), ("transformers", "T-1")):
        doc = parse(client.get(f"/projects/{demo_id}/{kind}/{tag}").text)
        link = doc.by_id("growth-link")
        assert link is not None and link.attrs["href"] == f"/projects/{demo_id}/growth/nodes/{tag}"
        assert client.get(link.attrs["href"]).status_code == 200


def test_a_reviewer_may_preview_but_not_apply_or_import(app, demo_id):
    from fastapi.testclient import TestClient

    from tests.integration.web.conftest import sign_in

    version = app.state.services.snapshot(demo_id).data_version
    with TestClient(app, raise_server_exceptions=False) as c:
        sign_in(c, app, "reviewer")
        base = f"/projects/{demo_id}/growth/nodes/LP-2/whatif"
        query = {"kva": "1", "category": "equipment", "poles": "1"}
        assert c.get(f"/projects/{demo_id}/growth").status_code == 200
        assert c.get(base, params=query).status_code == 200
        assert c.post(base, data={**query, "slot": "25"}).status_code == 403
        r = c.post(f"/projects/{demo_id}/growth/metered/preview", data={"node": "LP-1"})
        assert r.status_code == 403
    assert app.state.services.snapshot(demo_id).data_version == version
