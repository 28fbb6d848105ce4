"""The JSON API, the import/export round trip and the settings form."""

from __future__ import annotations

import copy

from tests.integration.web.html import parse


def test_api_lists_gets_and_computes(client, demo_id, demo_data):
    listed = client.get("/api/projects").json()
    assert [p["number"] for p in listed] == [demo_data["project"]["number"]]
    assert client.get(f"/api/projects/{demo_id}").json() == demo_data  # import → export is the same data
    results = client.get(f"/api/projects/{demo_id}/results").json()
    assert set(results["panels"]) == {p["tag"] for p in demo_data["panels"]}
    assert set(results["transformers"]) == {t["tag"] for t in demo_data["transformers"]}
    assert results["code"] == demo_data["project"]["code"]
    assert "/api/projects/{pid}" in client.get("/openapi.json").json()["paths"]


def test_put_replaces_and_bad_file_is_refused_with_problems(client, demo_id, demo_data):
    changed = copy.deepcopy(demo_data)
    changed["project"]["name"] = "Renamed hall"
    changed["panels"][0]["circuits"] = changed["panels"][0]["circuits"][:-1]
    tag = client.get(f"/api/projects/{demo_id}").headers["ETag"]
    r = client.put(f"/api/projects/{demo_id}", json=changed, headers={"If-Match": tag})
    assert r.status_code == 200
    got = client.get(f"/api/projects/{demo_id}")
    assert got.json() == changed
    assert got.headers["ETag"] == r.headers["ETag"] != tag  # a write moves the tag
    tag = got.headers["ETag"]

    bad = copy.deepcopy(changed)
    bad["panels"][2]["circuits"][0]["va"] = "lots"
    bad["transformers"][0]["kva"] = -1
    r = client.put(f"/api/projects/{demo_id}", json=bad, headers={"If-Match": tag})
    assert r.status_code == 422
    problems = r.json()["problems"]
    where = {(p["tag"], p["field"]) for p in problems}
    assert (bad["panels"][2]["tag"], "va") in where and (bad["transformers"][0]["tag"], "kva") in where
    assert any(p["slot"] == bad["panels"][2]["circuits"][0]["slot"] for p in problems)
    assert client.get(f"/api/projects/{demo_id}").json() == changed
    assert client.put("/api/projects/999", json=changed, headers={"If-Match": '"p999-v1"'}).status_code == 404
    assert client.get(f"/api/projects/{demo_id}").headers["ETag"] == tag  # a refused file moves nothing


def test_put_needs_the_current_etag_in_if_match(client, demo_id, demo_data):
    """RFC 9110 §13.1.1 (If-Match) and RFC 6585 §3 (428 Precondition Required), from memory."""
    url = f"/api/projects/{demo_id}"
    first = client.get(url).headers["ETag"]
    mine, theirs = copy.deepcopy(demo_data), copy.deepcopy(demo_data)
    mine["project"]["name"] = "Mine"
    theirs["project"]["name"] = "Theirs"

    r = client.put(url, json=mine)  # no If-Match
    assert r.status_code == 428 and "If-Match" in r.json()["detail"]
    assert client.put(url, json=mine, headers={"If-Match": "*"}).status_code == 428  # must name a version
    assert client.get(url).json()["project"]["name"] == demo_data["project"]["name"]

    assert client.put(url, json=theirs, headers={"If-Match": first}).status_code == 200  # the other writer
    r = client.put(url, json=mine, headers={"If-Match": first})  # stale: based on the version before theirs
    assert r.status_code == 409
    assert "nothing was written" in r.json()["detail"]
    assert client.get(url).json()["project"]["name"] == "Theirs"

    r = client.put(url, json=mine, headers={"If-Match": '"not-ours"'})
    assert r.status_code == 409 and "ETag" in r.json()["detail"]
    current = client.get(url).headers["ETag"]
    assert client.put(url, json=mine, headers={"If-Match": f'"other", {current}'}).status_code == 200
    assert client.get(url).json()["project"]["name"] == "Mine"


def test_settings_form(client, demo_id):
    url = f"/projects/{demo_id}/settings"
    r = client.post(url, data={"name": "Hall", "code": "NEC-2017", "vd_feeder_pct": "abc", "firm": "Typed firm"})
    assert r.status_code == 422
    doc = parse(r.text)
    assert "invalid" in doc.by_id("f-vd_feeder_pct").parent.attrs["class"]
    assert doc.by_id("f-firm").attrs["value"] == "Typed firm"
    assert client.get(f"/api/projects/{demo_id}").json()["project"]["code"] == "NEC-2023"
    r = client.post(
        url,
        data={"name": "Hall", "code": "NEC-2017", "vd_feeder_pct": "2.5", "include_future": "true"},
        follow_redirects=False,
    )
    assert r.status_code == 303
    info = client.get(f"/api/projects/{demo_id}").json()["project"]
    assert (info["code"], info["vd_feeder_pct"], info["include_future"]) == ("NEC-2017", 2.5, True)
    page = client.get(f"/projects/{demo_id}/tree").text
    assert "NEC-2017" in parse(page).by_id("code-edition").text
    assert client.get(f"/api/projects/{demo_id}/results").json()["code"] == "NEC-2017"


def test_create_copy_archive(client, demo_id):
    r = client.post("/projects", data={"name": "", "number": "27-001"})
    assert r.status_code == 422 and "is required" in parse(r.text).by_id("f-name").parent.text
    r = client.post("/projects", data={"name": "Fresh job", "number": "27-001"}, follow_redirects=False)
    assert r.status_code == 303
    r = client.post(f"/projects/{demo_id}/copy", data={}, follow_redirects=False)
    assert r.status_code == 303
    copy_id = int(r.headers["location"].split("/")[2])
    original, duplicate = client.get(f"/api/projects/{demo_id}").json(), client.get(f"/api/projects/{copy_id}").json()
    assert duplicate["panels"] == original["panels"] and duplicate["project"]["name"].endswith("(copy)")
    client.post(f"/projects/{copy_id}/archive", data={"archived": "true"})
    assert copy_id not in [p["id"] for p in client.get("/api/projects").json()]
    assert copy_id in [p["id"] for p in client.get("/api/projects?archived=true").json()]


def test_export_download_is_the_project_file(client, demo_id, demo_data):
    r = client.get(f"/projects/{demo_id}/export")
    assert r.status_code == 200 and "attachment" in r.headers["content-disposition"]
    assert r.json() == demo_data
