"""Every page of the demo answers 200 with its key elements, the cautions and the code edition."""

from __future__ import annotations

from urllib.parse import urlsplit

from server.calc.systems import SYSTEMS, slot_phase
from server.commands import CAUTION
from tests.integration.web.html import parse


def _check_common(html: str, code: str | None = "NEC-2023") -> None:
    doc = parse(html)
    footer = doc.by_id("caution")
    assert footer is not None and CAUTION in footer.text
    edition = doc.by_id("code-edition")
    assert edition is not None
    if code:
        assert code in edition.text


def test_project_list_shows_the_demo(client, demo_id, demo_data):
    r = client.get("/")
    assert r.status_code == 200
    _check_common(r.text, code=None)
    doc = parse(r.text)
    rows = doc.by_id("project-list").find_all("tr")
    assert any(demo_data["project"]["name"] in row.text and "26-041" in row.text for row in rows)


def test_every_panel_page_lays_out_the_board(client, demo_id, demo_data):
    for panel in demo_data["panels"]:
        r = client.get(f"/projects/{demo_id}/panels/{panel['tag']}")
        assert r.status_code == 200, panel["tag"]
        _check_common(r.text)
        doc = parse(r.text)
        grid = doc.by_id("circuit-grid")
        rows = grid.find("tbody").find_all("tr")
        assert len(rows) == (panel["spaces"] + 1) // 2
        spec = SYSTEMS[panel["system"]]
        for n, row in enumerate(rows, start=1):
            phase = row.find("td", class_="phase")
            assert phase.text == slot_phase(spec, 2 * n - 1), (panel["tag"], n)
        for c in panel["circuits"]:
            assert doc.by_id(f"slot-{c['slot']}") is not None, (panel["tag"], c["slot"])
            if c["poles"] > 1:
                cell = doc.by_id(f"td-s{c['slot']}-description")
                assert cell.attrs.get("rowspan") == str(min(c["poles"], len(rows) - (c["slot"] + 1) // 2 + 1))
            if c.get("feeds") is None and c["poles"] > 0:
                va = doc.by_id(f"s{c['slot']}-va")
                assert va is not None and va.attrs.get("hx-post", "").endswith(f"/circuits/{c['slot']}")
        for part in ("phase-totals", "panel-summary", "upstream", "panel-header"):
            assert doc.by_id(part) is not None, part
        assert CAUTION in doc.by_id("panel-summary").text


def test_tree_page_has_every_element_in_list_and_riser(client, demo_id, demo_data):
    r = client.get(f"/projects/{demo_id}/tree")
    assert r.status_code == 200
    _check_common(r.text)
    doc = parse(r.text)
    tags = [e["tag"] for key in ("sources", "transformers", "panels") for e in demo_data[key]]
    listed = [li.attrs["id"].removeprefix("node-") for li in doc.by_id("tree-list").find_all("li")]
    assert sorted(listed) == sorted(tags)
    assert listed[0] == demo_data["sources"][0]["tag"]
    svg = doc.find("svg", id="riser")
    assert sorted(a.attrs["data-tag"] for a in svg.find_all("a")) == sorted(tags)
    assert len(svg.find_all("path")) == len(tags) - len(demo_data["sources"])
    # Indentation follows the feeding depth: a panel behind a transformer is deeper than the transformer.
    depth = {li.attrs["id"].removeprefix("node-"): li.attrs["class"] for li in doc.by_id("tree-list").find_all("li")}
    assert depth["UTIL"] == "depth-0" and depth["MDP"] == "depth-1"
    assert depth["LP-1"] > depth["T-1"]


def test_transformer_pages(client, demo_id, demo_data):
    r = client.get(f"/projects/{demo_id}/transformers")
    assert r.status_code == 200
    _check_common(r.text)
    doc = parse(r.text)
    body = doc.by_id("transformer-schedule").find("tbody")
    assert [tr.attrs["id"] for tr in body.find_all("tr")] == [f"xfmr-{t['tag']}" for t in demo_data["transformers"]]
    for t in demo_data["transformers"]:
        r = client.get(f"/projects/{demo_id}/transformers/{t['tag']}")
        assert r.status_code == 200
        _check_common(r.text)
        doc = parse(r.text)
        assert doc.find("dd", data_role="loading") is not None
        assert doc.by_id("f-kva").attrs["value"] == str(t["kva"])


def test_warnings_link_to_rows_that_exist(client, demo_id):
    r = client.get(f"/projects/{demo_id}/warnings")
    assert r.status_code == 200
    _check_common(r.text)
    results = client.get(f"/api/projects/{demo_id}/results").json()
    expected = sum(len(p["warnings"]) for p in results["panels"].values())
    doc = parse(r.text)
    table = doc.by_id("warning-list")
    links = [a.attrs["href"] for a in table.find_all("a")] if table else []
    assert len(links) >= expected
    for href in links:
        parts = urlsplit(href)
        page = client.get(parts.path)
        assert page.status_code == 200, href
        if parts.fragment.startswith("slot-"):
            assert parse(page.text).by_id(parts.fragment) is not None, href


def test_settings_and_delete_confirm_pages(client, demo_id):
    r = client.get(f"/projects/{demo_id}/settings")
    assert r.status_code == 200
    _check_common(r.text)
    assert parse(r.text).by_id("f-code").find("option", selected="*").text == "NEC-2023"
    r = client.get(f"/projects/{demo_id}/tree/T-1/delete")
    assert r.status_code == 200
    doc = parse(r.text)
    assert doc.find("input", value="refeed") is not None and "LP-1" in doc.by_id("delete-form").text


def test_unknown_things_get_a_friendly_404(client, demo_id):
    for path in (f"/projects/{demo_id}/panels/NOPE", "/projects/9999/tree", "/no/such/page"):
        r = client.get(path)
        assert r.status_code == 404
        assert "Traceback" not in r.text
        assert parse(r.text).find("p", class_="error-message") is not None


def test_element_links_redirect_to_the_right_page(client, demo_id):
    assert (
        client.get(f"/projects/{demo_id}/elements/LP-1", follow_redirects=False)
        .headers["location"]
        .endswith("/panels/LP-1")
    )
    assert (
        client.get(f"/projects/{demo_id}/elements/T-1", follow_redirects=False)
        .headers["location"]
        .endswith("/transformers/T-1")
    )


def test_an_unexpected_failure_shows_an_apology_not_a_traceback(client, app, demo_id, monkeypatch, caplog):
    def broken(_pid):
        raise RuntimeError("simulated fault deep in the stack")

    monkeypatch.setattr(app.state.services, "snapshot", broken)
    r = client.get(f"/projects/{demo_id}/tree")
    assert r.status_code == 500
    assert "Traceback" not in r.text and "simulated fault" not in r.text
    assert "nothing was half-saved" in parse(r.text).find("p", class_="error-message").text
    assert any("simulated fault" in (rec.exc_text or str(rec.exc_info)) for rec in caplog.records)  # logged
