"""Circuit edits in the panel editor: one request saves, recomputes and answers every changed fragment."""

from __future__ import annotations

from tests.helpers import assert_close
from tests.integration.web.conftest import htmx
from tests.integration.web.html import parse


def _phase_kva(doc) -> dict[str, float]:
    cells = doc.by_id("phase-totals").find_all("td", data_role="phase-kva")
    return {c.attrs["data-phase"]: float(c.text.replace(",", "")) for c in cells}


def _badge_pct(doc, tag: str) -> float:
    b = doc.by_id("upstream").find("a", data_tag=tag)
    return float(b.find("span", data_role="pct").text.split("%")[0])


def _circuit(data: dict, tag: str, slot: int) -> dict:
    panel = next(p for p in data["panels"] if p["tag"] == tag)
    return next(c for c in panel["circuits"] if c["slot"] == slot)


def test_va_edit_updates_totals_and_upstream_transformer_in_one_response(client, app, demo_id, demo_data):
    url = f"/projects/{demo_id}/panels/LP-1"
    before = parse(client.get(url).text)
    c = _circuit(demo_data, "LP-1", 1)
    new_va = (c["va"] or 0) + 6000
    r = client.post(f"{url}/circuits/1", data={"va": str(new_va), "description": c["description"]}, headers=htmx("va"))
    assert r.status_code == 200
    after = parse(r.text)
    # The edited cell comes back out of band, as typed and without an error mark.
    cell = after.by_id("td-s1-va")
    assert cell.attrs["hx-swap-oob"] == "true" and "invalid" not in cell.attrs["class"]
    assert after.by_id("s1-va").attrs["value"] == str(new_va)
    # Per-phase totals: slot 1 sits on phase A (odd slots, row 1): A grows by 6 kVA, the others stay.
    kva_before, kva_after = _phase_kva(before), _phase_kva(after)
    assert_close(kva_after["A"] - kva_before["A"], 6.0, rel=1e-2, what="phase A kVA change")
    assert kva_after["B"] == kva_before["B"] and kva_after["C"] == kva_before["C"]
    # The transformer feeding LP-1 (T-1) is more loaded, in the same response.
    assert _badge_pct(after, "T-1") > _badge_pct(before, "T-1")
    assert after.by_id("panel-summary").attrs.get("hx-swap-oob") == "true"
    # Stored, and the incremental result equals a full recompute from the database.
    assert _circuit(client.get(f"/api/projects/{demo_id}").json(), "LP-1", 1)["va"] == new_va
    incremental = client.get(f"/api/projects/{demo_id}/results").json()
    app.state.services.cache.drop(demo_id)
    assert client.get(f"/api/projects/{demo_id}/results").json() == incremental


def test_bad_value_comes_back_marked_and_nothing_is_stored(client, demo_id):
    url = f"/projects/{demo_id}/panels/LP-1"
    stored = client.get(f"/api/projects/{demo_id}").json()
    r = client.post(f"{url}/circuits/1", data={"va": "12kw", "description": "Typed text"}, headers=htmx("va"))
    assert r.status_code == 422
    doc = parse(r.text)
    cell = doc.by_id("td-s1-va")
    assert "invalid" in cell.attrs["class"]
    assert doc.by_id("s1-va").attrs["value"] == "12kw"  # what the user typed, kept
    assert "must be a number" in doc.by_id("s1-va-msg").text
    assert "Circuit 1 not saved" in doc.by_id("flash").text
    assert client.get(f"/api/projects/{demo_id}").json() == stored  # nothing partial written

    # Without htmx the whole page comes back: the bad field marked, the other typed values kept.
    r = client.post(f"{url}/circuits/1", data={"va": "-5", "pf": "1.4", "description": "Typed text"})
    assert r.status_code == 422
    doc = parse(r.text)
    assert doc.by_id("s1-description").attrs["value"] == "Typed text"
    assert "at least 0" in doc.by_id("s1-va-msg").text
    assert "at most 1" in doc.by_id("s1-pf-msg").text
    assert client.get(f"/api/projects/{demo_id}").json() == stored


def test_panel_rule_breach_names_the_slot_and_stores_nothing(client, demo_id, demo_data):
    # A 3-pole breaker at slot 1 would overlap whatever sits at slot 3 or 5 (or run past the spaces).
    panel = next(p for p in demo_data["panels"] if p["tag"] == "LP-1")
    taken = {c["slot"] for c in panel["circuits"]}
    assert 3 in taken or 5 in taken
    stored = client.get(f"/api/projects/{demo_id}").json()
    r = client.post(f"/projects/{demo_id}/panels/LP-1/circuits/1", data={"poles": "3"}, headers=htmx("poles"))
    assert r.status_code == 422
    assert "overlap" in parse(r.text).by_id("grid-message").text
    assert client.get(f"/api/projects/{demo_id}").json() == stored


def test_add_change_poles_and_remove_a_circuit(client, demo_id, demo_data):
    panel = next(p for p in demo_data["panels"] if p["tag"] == "LP-1")
    used = set()
    for c in panel["circuits"]:
        used.update(c["slot"] + 2 * i for i in range(max(c["poles"], 1)))
    free = next(s for s in range(1, panel["spaces"] - 3) if s % 2 == 1 and {s, s + 2}.isdisjoint(used))
    base = f"/projects/{demo_id}/panels/LP-1/circuits/{free}"
    r = client.post(f"{base}/add", headers=htmx())
    assert r.status_code == 200
    row = parse(r.text).by_id(f"r-{(free + 1) // 2}")
    assert row is not None and row.attrs["hx-swap-oob"] == "true"
    r = client.post(base, data={"poles": "2", "va": "3000", "category": "equipment"}, headers=htmx("poles"))
    assert r.status_code == 200
    doc = parse(r.text)
    assert doc.by_id(f"td-s{free}-va").attrs["rowspan"] == "2"
    assert doc.by_id(f"r-{(free + 1) // 2 + 1}") is not None  # the spanned row comes back too
    stored = _circuit(client.get(f"/api/projects/{demo_id}").json(), "LP-1", free)
    assert stored["poles"] == 2 and stored["va"] == 3000
    r = client.post(f"{base}/delete", headers=htmx())
    assert r.status_code == 200
    panel_after = next(p for p in client.get(f"/api/projects/{demo_id}").json()["panels"] if p["tag"] == "LP-1")
    assert free not in {c["slot"] for c in panel_after["circuits"]}


def test_a_feeding_breaker_cannot_be_removed_from_the_grid(client, demo_id):
    mdp = next(p for p in client.get(f"/api/projects/{demo_id}").json()["panels"] if p["tag"] == "MDP")
    feeder = next(c for c in mdp["circuits"] if c.get("feeds"))
    r = client.post(f"/projects/{demo_id}/panels/MDP/circuits/{feeder['slot']}/delete", headers=htmx())
    assert r.status_code == 422
    assert feeder["feeds"] in parse(r.text).by_id("grid-message").text


def test_panel_header_edit_and_its_validation(client, demo_id):
    url = f"/projects/{demo_id}/panels/LP-1"
    r = client.post(url, data={"bus_amps": "lots", "location": "Room 9", "feeder_length_ft": "80"})
    assert r.status_code == 422
    doc = parse(r.text)
    field = doc.by_id("f-bus_amps").parent
    assert "invalid" in field.attrs["class"] and "must be a number" in field.text
    assert doc.by_id("f-location").attrs["value"] == "Room 9"
    r = client.post(
        url, data={"bus_amps": "400", "location": "Room 9", "feeder_length_ft": "80"}, follow_redirects=False
    )
    assert r.status_code == 303
    lp1 = next(p for p in client.get(f"/api/projects/{demo_id}").json()["panels"] if p["tag"] == "LP-1")
    assert (lp1["bus_amps"], lp1["location"], lp1["feeder"]["length_ft"]) == (400, "Room 9", 80)


def test_concurrent_edits_all_land_and_the_cache_matches_a_full_recompute(app, demo_id, demo_data):
    import threading

    from server.services import Services

    svc = app.state.services
    # A second service object stands for another server process on the same database.
    other = Services(svc.sessions, cache_size=4)
    lp1 = next(p for p in demo_data["panels"] if p["tag"] == "LP-1")
    slots = [c["slot"] for c in lp1["circuits"] if c.get("feeds") is None and c["poles"] == 1 and c["va"]][:4]
    errors: list[BaseException] = []

    def work(service, slot: int) -> None:
        try:
            for i in range(5):
                service.edit_circuit(demo_id, "LP-1", slot, {"va": str(1000 + 10 * slot + i)})
        except BaseException as exc:  # noqa: BLE001 - reported below
            errors.append(exc)

    threads = [threading.Thread(target=work, args=(svc if n % 2 else other, s)) for n, s in enumerate(slots)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert not errors, errors
    stored = {c.slot: c.va for c in svc.snapshot(demo_id).model.panel("LP-1").circuits}
    assert all(stored[s] == 1000 + 10 * s + 4 for s in slots)
    cached = svc.snapshot(demo_id).result.to_json()
    svc.cache.drop(demo_id)
    assert svc.snapshot(demo_id).result.to_json() == cached


def test_feeder_landing_is_a_header_field_where_a_rotation_is_allowed(client, demo_id):
    url = f"/projects/{demo_id}/panels/LP-1"
    api = f"/api/projects/{demo_id}"
    doc = parse(client.get(url).text)
    options = doc.by_id("f-feeder_rotation").find_all("option")
    assert [(o.attrs["value"], o.text) for o in options] == [
        ("0", "A→A, B→B, C→C (as labelled)"),
        ("1", "A→B, B→C, C→A"),
        ("2", "A→C, B→A, C→B"),
    ]
    assert doc.by_id("panel-summary").find("dd", data_role="feeder-landing") is None
    before = client.get(f"{api}/results").json()
    # A value outside 0–2 comes back on the form with the message beside the field; nothing stored.
    r = client.post(url, data={"feeder_rotation": "5", "location": "Room 9"})
    assert r.status_code == 422
    field = parse(r.text).by_id("f-feeder_rotation").parent
    assert "invalid" in field.attrs["class"] and "must be 0, 1 or 2" in field.text
    assert "feeder_rotation" not in next(p for p in client.get(api).json()["panels"] if p["tag"] == "LP-1")
    r = client.post(url, data={"feeder_rotation": "1"}, follow_redirects=False)
    assert r.status_code == 303
    lp1 = next(p for p in client.get(api).json()["panels"] if p["tag"] == "LP-1")
    assert lp1["feeder_rotation"] == 1
    doc = parse(client.get(url).text)
    assert doc.by_id("f-feeder_rotation").find("option", selected="*").attrs["value"] == "1"
    assert "A→B, B→C, C→A" in doc.by_id("panel-summary").find("dd", data_role="feeder-landing").text
    after = client.get(f"{api}/results").json()
    # LP-1's own totals keep its labels; T-1's secondary sees them relabelled (A→B, B→C, C→A).
    assert after["panels"]["LP-1"]["connected_va"] == before["panels"]["LP-1"]["connected_va"]
    own = before["transformers"]["T-1"]["secondary_line_amps"]
    rotated = after["transformers"]["T-1"]["secondary_line_amps"]
    assert_close(rotated["B"], own["A"], rel=1e-3)
    assert_close(rotated["C"], own["B"], rel=1e-3)
    assert_close(rotated["A"], own["C"], rel=1e-3)


def test_feeder_landing_is_refused_on_a_single_phase_panel(client, demo_id):
    url = f"/projects/{demo_id}/panels/SB-1"
    assert parse(client.get(url).text).by_id("f-feeder_rotation") is None
    r = client.post(url, data={"feeder_rotation": "1"})
    assert r.status_code == 422
    assert "three-phase panel without a high leg" in parse(r.text).by_id("panel-header").text
