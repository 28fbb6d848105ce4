"""Adding, re-feeding and deleting elements of the distribution, including elements that feed others."""

from __future__ import annotations

from tests.integration.web.html import parse


def _file(client, pid: int) -> dict:
    return client.get(f"/api/projects/{pid}").json()


def _tags(data: dict) -> set[str]:
    return {e["tag"] for key in ("sources", "transformers", "panels") for e in data[key]}


def _feeding_breakers(data: dict, tag: str) -> list[tuple[str, int]]:
    return [(p["tag"], c["slot"]) for p in data["panels"] for c in p["circuits"] if c.get("feeds") == tag]


def test_deleting_a_node_that_feeds_others_asks_first(client, demo_id):
    before = _file(client, demo_id)
    r = client.post(f"/projects/{demo_id}/tree/T-1/delete", data={})
    assert r.status_code == 422
    doc = parse(r.text)
    assert "LP-1" in doc.by_id("delete-form").text and doc.find("span", class_="msg") is not None
    assert _file(client, demo_id) == before


def test_delete_and_refeed_dependants(client, demo_id):
    before = _file(client, demo_id)
    lp1_children = [e["tag"] for e in before["panels"] if e.get("fed_from") == "T-1"] + [
        c["feeds"] for p in before["panels"] if p["tag"] == "LP-1" for c in p["circuits"] if c.get("feeds")
    ]
    r = client.post(
        f"/projects/{demo_id}/tree/T-1/delete",
        data={"dependants": "refeed", "refeed_to": "T-2"},
        follow_redirects=False,
    )
    assert r.status_code == 303
    after = _file(client, demo_id)
    assert "T-1" not in _tags(after)
    assert _feeding_breakers(after, "T-1") == []  # the MDP breaker that fed T-1 went with it
    lp1 = next(p for p in after["panels"] if p["tag"] == "LP-1")
    assert lp1["fed_from"] == "T-2"
    assert set(lp1_children) <= _tags(after)  # what LP-1 feeds is untouched


def test_delete_dependants_too(client, demo_id):
    before = _file(client, demo_id)
    r = client.post(f"/projects/{demo_id}/tree/T-1/delete", data={"dependants": "delete"}, follow_redirects=False)
    assert r.status_code == 303
    after = _file(client, demo_id)
    gone = _tags(before) - _tags(after)
    assert {"T-1", "LP-1"} <= gone
    assert all(not _feeding_breakers(after, t) for t in gone)
    # Everything gone was downstream of T-1: nothing else was touched.
    assert "T-2" in _tags(after) and "LP-2" in _tags(after)


def test_refeed_into_a_mismatched_system_is_refused_and_nothing_changes(client, demo_id):
    before = _file(client, demo_id)
    r = client.post(f"/projects/{demo_id}/tree/T-1/delete", data={"dependants": "refeed", "refeed_to": "T-3"})
    assert r.status_code == 422
    assert "does not match" in parse(r.text).by_id("delete-form").text
    assert _file(client, demo_id) == before


def test_add_panel_from_a_panel_gets_a_feeding_breaker(client, demo_id):
    r = client.post(
        f"/projects/{demo_id}/tree/add",
        data={
            "kind": "panel",
            "tag": "LP-9",
            "parent": "LP-1",
            "system": "208Y/120 3PH 4W",
            "bus_amps": "100",
            "spaces": "24",
            "breaker_amps": "60",
        },
        follow_redirects=False,
    )
    assert r.status_code == 303, r.text[:500]
    after = _file(client, demo_id)
    [(panel, slot)] = _feeding_breakers(after, "LP-9")
    assert panel == "LP-1"
    breaker = next(c for p in after["panels"] if p["tag"] == "LP-1" for c in p["circuits"] if c["slot"] == slot)
    assert breaker["poles"] == 3 and breaker["breaker_amps"] == 60
    page = client.get(f"/projects/{demo_id}/tree")
    assert parse(page.text).by_id("node-LP-9") is not None


def test_add_with_bad_values_keeps_them_and_marks_the_field(client, demo_id):
    before = _file(client, demo_id)
    r = client.post(
        f"/projects/{demo_id}/tree/add",
        data={
            "kind": "transformer",
            "tag": "T-9",
            "parent": "UTIL",
            "kva": "-3",
            "primary": "480 3PH 3W",
            "secondary": "208Y/120 3PH 4W",
        },
    )
    assert r.status_code == 422
    doc = parse(r.text)
    assert "invalid" in doc.by_id("f-kva").parent.attrs["class"]
    assert doc.by_id("f-tag").attrs["value"] == "T-9"
    assert _file(client, demo_id) == before
    # A panel with no room for the feeding breaker is refused on the "Fed from" field.
    r = client.post(
        f"/projects/{demo_id}/tree/add",
        data={
            "kind": "transformer",
            "tag": "T-9",
            "parent": "MDP",
            "kva": "30",
            "primary": "480 3PH 3W",
            "secondary": "208Y/120 3PH 4W",
        },
    )
    assert r.status_code == 422 and "no free run" in parse(r.text).by_id("f-parent").parent.text
    assert _file(client, demo_id) == before


def test_move_panel_to_another_transformer(client, demo_id):
    r = client.post(f"/projects/{demo_id}/tree/LP-2/move", data={"parent": "T-1"}, follow_redirects=False)
    assert r.status_code == 303
    lp2 = next(p for p in _file(client, demo_id)["panels"] if p["tag"] == "LP-2")
    assert lp2["fed_from"] == "T-1"
