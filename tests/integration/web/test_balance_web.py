"""Phase balancing in the panel editor: preview, apply as one edit with one audit row, undo, 409, roles.

The reference for the proposal is ``panelwright balance`` (the CLI) run on the same demo file:
the web preview and the stored result after "apply" must agree with it.  Independent checks
(common practice, the trade convention for panelboard phase loading): a breaker of P poles at
slot s puts VA/P on each phase it covers; slot s is in row (s+1)//2 and rows run A, B, C, A, …
on a three-phase panelboard; moving breakers never changes the total connected VA.
"""

from __future__ import annotations

import json

import pytest
from click.testing import CliRunner
from sqlalchemy import func, select

from server import audit
from server.commands import balance as balance_cmd
from server.db import models as db
from server.repo import projects as repo
from tests.helpers import DEMO_FILE, assert_close
from tests.integration.web.conftest import htmx, sign_in
from tests.integration.web.html import parse

TAG = "LP-1"


def _url(pid: int, what: str = "") -> str:
    return f"/projects/{pid}/panels/{TAG}/balance" + (f"/{what}" if what else "")


@pytest.fixture(scope="module")
def cli_proposal(tmp_path_factory: pytest.TempPathFactory) -> tuple[dict, dict]:
    """``panelwright balance DEMO --panel LP-1 --json --out NEW``: the proposal and the written project."""
    out = tmp_path_factory.mktemp("cli") / "balanced.json"
    result = CliRunner().invoke(balance_cmd.command, [str(DEMO_FILE), "--panel", TAG, "--json", "--out", str(out)])
    assert result.exit_code == 0, result.output
    return json.loads(result.stdout), json.loads(out.read_text(encoding="utf-8"))


def _form(doc, form_id: str) -> dict[str, str]:
    form = doc.by_id(form_id)
    assert form is not None, f"no form #{form_id}"
    return {i.attrs["name"]: i.attrs.get("value", "") for i in form.find_all("input") if i.attrs.get("name")}


def _loading(doc) -> dict[str, tuple[str, str]]:
    out = {}
    for tr in doc.by_id("balance-loading").find_all("tr"):
        if "data-role" in tr.attrs:
            tds = tr.find_all("td")
            out[tr.attrs["data-role"]] = (tds[0].text, tds[1].text)
    return out


def _num(text: str) -> float:
    return float(text.replace(",", "").replace("%", "").strip())


def _panel(data: dict, tag: str = TAG) -> dict:
    return next(p for p in data["panels"] if p["tag"] == tag)


def _preview(client, pid: int, query: str = ""):
    r = client.get(_url(pid) + query, headers=htmx())
    assert r.status_code == 200, r.text
    return parse(r.text)


def _audit_count(app, pid: int) -> int:
    with app.state.services.sessions() as s:
        return s.scalar(select(func.count()).select_from(db.AuditEvent).where(db.AuditEvent.project_id == pid))


def _phase_of(slot: int) -> str:
    """Bus phase of a slot on a three-phase panelboard (common practice): row (s+1)//2, rows A, B, C, …"""
    return "ABC"[((slot + 1) // 2 - 1) % 3]


def test_preview_of_lp1_shows_moves_and_a_lower_largest_phase(client, demo_id, cli_proposal):
    cli, _ = cli_proposal
    doc = _preview(client, demo_id)
    loading = _loading(doc)
    before_max, after_max = (_num(x) for x in loading["max-phase"])
    assert after_max < before_max  # LP-1 of the demo is imbalanced
    assert_close(after_max, cli["after"]["max_phase_va"], abs_=0.5, what="largest phase after, web vs CLI")
    assert_close(before_max, cli["before"]["max_phase_va"], abs_=0.5, what="largest phase before, web vs CLI")
    for ph in ("A", "B", "C"):
        b, a = loading[f"phase-{ph}"]
        assert_close(_num(a), cli["after"]["phase_va"][ph], abs_=0.5, what=f"phase {ph} after")
    assert "neutral" in loading and "imbalance" in loading
    assert _num(loading["imbalance"][1]) < _num(loading["imbalance"][0])
    # The proven lower bound and the gap are shown.
    bound = doc.by_id("balance-bound")
    assert_close(
        _num(bound.find(None, data_role="lower-bound").text.replace("VA", "")), cli["lower_bound_va"], abs_=0.5
    )
    assert_close(_num(bound.find(None, data_role="gap").text), cli["gap_pct"], abs_=0.001)
    # Both boards, every move marked on both with the slot it goes to / comes from.
    moves = {(m["from_slot"], m["to_slot"]) for m in cli["moves"]}
    current = {
        (int(td.attrs["data-slot"]), int(td.attrs["data-moved"]))
        for td in doc.by_id("board-current").find_all("td", class_="moved")
        if "data-moved" in td.attrs
    }
    proposed = {
        (int(td.attrs["data-moved"]), int(td.attrs["data-slot"]))
        for td in doc.by_id("board-proposed").find_all("td", class_="moved")
        if "data-moved" in td.attrs
    }
    assert current == moves and proposed == moves and moves
    cell = doc.by_id(f"current-s{cli['moves'][0]['from_slot']}")
    assert f"→ {cli['moves'][0]['to_slot']}" in cell.text
    form = _form(doc, "balance-apply-form")
    assert form["moves"] and form["fingerprint"]
    assert doc.by_id("balance-cancel") is not None
    assert "engineer of record" in doc.by_id("balance-preview").text  # the safety caution


def test_options_reach_the_balancer(client, demo_id):
    doc = _preview(client, demo_id, "?max_moves=2&keep_sides=on")
    assert int(doc.by_id("balance-preview").attrs["data-moves"]) <= 2
    for td in doc.by_id("board-current").find_all("td", class_="ckt"):
        if "data-moved" in td.attrs:  # keep sides: odd stays odd, even stays even
            assert int(td.attrs["data-slot"]) % 2 == int(td.attrs["data-moved"]) % 2
    assert doc.by_id("balance-max-moves").attrs["value"] == "2"
    assert "checked" in doc.by_id("balance-keep-sides").attrs
    neutral = _preview(client, demo_id, "?objective=neutral")
    assert neutral.find(None, data_role="lower-bound-neutral") is not None


def test_bad_options_are_named_and_nothing_runs(client, demo_id):
    r = client.get(_url(demo_id) + "?max_moves=lots&objective=sideways", headers=htmx())
    assert r.status_code == 422
    msg = parse(r.text).by_id("balance-errors").text
    assert "max moves" in msg and "'lots'" in msg and "objective" in msg and "sideways" in msg
    assert parse(r.text).by_id("balance-preview") is None


def test_apply_stores_the_cli_arrangement_as_one_edit(app, client, demo_id, cli_proposal):
    cli, cli_file = cli_proposal
    svc = app.state.services
    before_snap = svc.snapshot(demo_id)
    versions_before = dict(before_snap.circuit_versions[TAG])
    audit_before = _audit_count(app, demo_id)
    doc = _preview(client, demo_id)
    r = client.post(_url(demo_id, "apply"), data=_form(doc, "balance-apply-form"), headers=htmx())
    assert r.status_code == 200, r.text
    out = parse(r.text)
    assert f"{cli['breaker_moves']} breakers moved" in out.by_id("balance-message").text

    # The stored panel is exactly what the CLI writes with --out (slot order as in the file).
    stored = svc.export_file(demo_id)
    got = sorted(_panel(stored)["circuits"], key=lambda c: c["slot"])
    want = sorted(_panel(cli_file)["circuits"], key=lambda c: c["slot"])
    assert got == want
    # Every other panel is untouched.
    demo = json.loads(DEMO_FILE.read_text(encoding="utf-8"))
    for p in demo["panels"]:
        if p["tag"] != TAG:
            assert sorted(_panel(stored, p["tag"])["circuits"], key=lambda c: c["slot"]) == sorted(
                p["circuits"], key=lambda c: c["slot"]
            )

    # Recomputed by the engine, the totals equal the CLI's "after".
    after_snap = svc.snapshot(demo_id)
    result = after_snap.result.panels[TAG]
    for ph, va in cli["after"]["phase_va"].items():
        assert_close(result.connected_va[ph], va, abs_=0.1, what=f"engine phase {ph} VA after apply")
    assert_close(result.neutral_amps, cli["after"]["neutral_amps"], abs_=0.01, what="engine neutral A after apply")
    # The phase totals of the page come back out of band with the new values.
    totals = out.by_id("phase-totals")
    assert totals.attrs.get("hx-swap-oob") == "true"
    for td in totals.find_all("td", data_role="phase-kva"):
        assert_close(float(td.text), cli["after"]["phase_va"][td.attrs["data-phase"]] / 1000, abs_=0.006)

    # Independent check (common practice): the change of each phase is the moved breakers' VA/P taken
    # off the phases they left and put on the phases they reach; the total is unchanged.
    delta = dict.fromkeys("ABC", 0.0)
    old = {c["slot"]: c for c in _panel(demo)["circuits"]}
    for m in cli["moves"]:
        c = old[m["from_slot"]]
        if not c["poles"] or c["va"] is None:
            continue
        share = c["va"] / c["poles"]
        for k in range(c["poles"]):
            delta[_phase_of(m["from_slot"] + 2 * k)] -= share
            delta[_phase_of(m["to_slot"] + 2 * k)] += share
    prev = before_snap.result.panels[TAG]
    for ph in "ABC":
        assert_close(result.connected_va[ph] - prev.connected_va[ph], delta[ph], abs_=0.01, what=f"phase {ph} change")
    assert_close(sum(result.connected_va.values()), sum(prev.connected_va.values()), abs_=0.01)

    # One edit: data_version up by one, moved circuits' versions up, ONE audit row.
    assert after_snap.data_version == before_snap.data_version + 1
    versions_after = after_snap.circuit_versions[TAG]
    for m in cli["moves"]:
        assert versions_after[m["to_slot"]] > max(versions_before.values())
    assert _audit_count(app, demo_id) == audit_before + 1
    e = audit.events(svc.sessions, project_id=demo_id, limit=1)[0]
    assert (e.user, e.action, e.panel) == ("engineer", "balance", TAG)
    assert sorted(e.before.values()) == sorted(m["from_slot"] for m in cli["moves"])
    assert sorted(e.after.values()) == sorted(m["to_slot"] for m in cli["moves"])
    assert e.before["Display wall"] == 24 and e.after["Display wall"] == next(
        m["to_slot"] for m in cli["moves"] if m["from_slot"] == 24
    )
    # The answer offers Undo.
    assert _form(out, "balance-undo-form")["moves"]


def test_undo_restores_the_exported_project_exactly(app, client, demo_id):
    svc = app.state.services
    original = svc.export_file(demo_id)
    audit_before = _audit_count(app, demo_id)
    applied = parse(
        client.post(
            _url(demo_id, "apply"), data=_form(_preview(client, demo_id), "balance-apply-form"), headers=htmx()
        ).text
    )
    assert svc.export_file(demo_id) != original
    r = client.post(_url(demo_id, "undo"), data=_form(applied, "balance-undo-form"), headers=htmx())
    assert r.status_code == 200, r.text
    assert "previous arrangement" in parse(r.text).by_id("balance-message").text
    assert svc.export_file(demo_id) == original
    lines = audit.events(svc.sessions, project_id=demo_id, limit=2)
    assert [e.action for e in lines] == ["undo-balance", "balance"]
    assert lines[0].before == lines[1].after and lines[0].after == lines[1].before
    assert _audit_count(app, demo_id) == audit_before + 2
    # Undo twice is refused: the panel is no longer what the undo form was made for.
    again = client.post(_url(demo_id, "undo"), data=_form(applied, "balance-undo-form"), headers=htmx())
    assert again.status_code == 409
    assert svc.export_file(demo_id) == original


def test_stale_apply_gets_409_and_nothing_is_written(app, client, demo_id):
    svc = app.state.services
    form = _form(_preview(client, demo_id), "balance-apply-form")
    # A colleague changes a circuit of LP-1 after the preview was drawn.
    assert (
        client.post(f"/projects/{demo_id}/panels/{TAG}/circuits/6", data={"va": "1900"}, headers=htmx("va")).status_code
        == 200
    )
    stored = svc.export_file(demo_id)
    version = svc.snapshot(demo_id).data_version
    count = _audit_count(app, demo_id)
    r = client.post(_url(demo_id, "apply"), data=form, headers=htmx())
    assert r.status_code == 409
    doc = parse(r.text)
    assert "changed" in doc.by_id("balance-message").text and "nothing was written" in doc.by_id("balance-message").text
    assert doc.by_id("balance-again") is not None
    assert svc.export_file(demo_id) == stored
    assert svc.snapshot(demo_id).data_version == version
    assert _audit_count(app, demo_id) == count


def test_an_edit_of_another_panel_does_not_block_apply(app, client, demo_id):
    svc = app.state.services
    form = _form(_preview(client, demo_id), "balance-apply-form")
    other = next(p for p in svc.snapshot(demo_id).model.panels if p.tag != TAG and any(not c.feeds for c in p.circuits))
    slot = next(c.slot for c in other.circuits if not c.feeds and not c.is_space)
    r = client.post(
        f"/projects/{demo_id}/panels/{other.tag}/circuits/{slot}", data={"notes": "checked"}, headers=htmx("notes")
    )
    assert r.status_code == 200
    assert client.post(_url(demo_id, "apply"), data=form, headers=htmx()).status_code == 200


def test_an_editor_page_drawn_before_the_apply_cannot_edit_the_wrong_breaker(app, client, demo_id, cli_proposal):
    cli, _ = cli_proposal
    svc = app.state.services
    m = cli["moves"][0]
    old_version = svc.snapshot(demo_id).circuit_versions[TAG][m["to_slot"]]  # what the old page holds for that slot
    client.post(_url(demo_id, "apply"), data=_form(_preview(client, demo_id), "balance-apply-form"), headers=htmx())
    r = client.post(
        f"/projects/{demo_id}/panels/{TAG}/circuits/{m['to_slot']}",
        data={"va": "999", "version": str(old_version)},
        headers=htmx("va"),
    )
    assert r.status_code == 409
    assert svc.snapshot(demo_id).model.panel(TAG).circuit_at(m["to_slot"]).va != 999


@pytest.mark.parametrize(
    ("moves", "words"),
    [
        ("1:2", "overlap"),  # onto a breaker that does not move
        ("25:27", "feeds LP-1K"),  # a sub-feed breaker stays
        ("99:1", "no circuit starts at slot 99"),
        ("1>3", "is not a move"),
        ("", "no moves"),
    ],
)
def test_moves_that_break_a_rule_are_refused_by_name(app, client, demo_id, moves, words):
    svc = app.state.services
    stored = svc.export_file(demo_id)
    fp = _form(_preview(client, demo_id), "balance-apply-form")["fingerprint"]
    r = client.post(_url(demo_id, "apply"), data={"moves": moves, "fingerprint": fp}, headers=htmx())
    assert r.status_code == 422
    msg = parse(r.text).by_id("balance-message").text
    assert words in msg and "Not applied" in msg
    assert svc.export_file(demo_id) == stored


def test_locked_circuit_is_never_moved(app, client, demo_id):
    svc = app.state.services
    data = svc.export_file(demo_id)
    c1 = next(c for c in _panel(data)["circuits"] if c["slot"] == 1)
    c1["locked"] = True
    svc.replace_project(demo_id, data)
    doc = _preview(client, demo_id)
    assert doc.by_id("current-s1").attrs.get("data-moved") is None
    fp = _form(doc, "balance-apply-form")["fingerprint"]
    r = client.post(_url(demo_id, "apply"), data={"moves": "1:3 3:1", "fingerprint": fp}, headers=htmx())
    assert r.status_code == 422 and "locked" in parse(r.text).by_id("balance-message").text


def test_reviewer_may_neither_preview_nor_apply(app, client, demo_id):
    from fastapi.testclient import TestClient

    svc = app.state.services
    form = _form(_preview(client, demo_id), "balance-apply-form")
    stored = svc.export_file(demo_id)
    reviewer = TestClient(app, raise_server_exceptions=False)
    sign_in(reviewer, app, "reviewer")
    assert reviewer.get(_url(demo_id), headers=htmx()).status_code == 403
    assert reviewer.post(_url(demo_id, "apply"), data=form, headers=htmx()).status_code == 403
    assert reviewer.post(_url(demo_id, "undo"), data=form, headers=htmx()).status_code == 403
    assert svc.export_file(demo_id) == stored
    # The panel page itself stays readable for a reviewer.
    assert reviewer.get(f"/projects/{demo_id}/panels/{TAG}").status_code == 200


def test_without_htmx_the_routes_render_pages(app, client, demo_id):
    page = client.get(_url(demo_id))
    assert page.status_code == 200
    doc = parse(page.text)
    assert doc.by_id("balance-back") is not None and doc.by_id("caution") is not None
    r = client.post(_url(demo_id, "apply"), data=_form(doc, "balance-apply-form"))
    assert r.status_code == 200
    applied = parse(r.text)
    assert applied.by_id("balance-undo-form") is not None and applied.by_id("phase-totals") is None


def test_panel_page_offers_the_balance_action(client, demo_id):
    doc = parse(client.get(f"/projects/{demo_id}/panels/{TAG}").text)
    link = doc.by_id("balance-open")
    assert link.attrs["hx-get"] == _url(demo_id) and link.attrs["hx-target"] == "#balance-area"
    assert doc.by_id("balance-area") is not None


def test_unknown_panel_is_named(client, demo_id):
    r = client.get(f"/projects/{demo_id}/panels/NOPE/balance", headers=htmx())
    assert r.status_code == 404 and "NOPE" in r.text


def test_results_after_apply_and_undo_equal_a_full_recompute(app, client, demo_id):
    svc = app.state.services
    applied = parse(
        client.post(
            _url(demo_id, "apply"), data=_form(_preview(client, demo_id), "balance-apply-form"), headers=htmx()
        ).text
    )
    for step in ("apply", "undo"):
        with svc.sessions() as s:
            version = repo.data_version(s, project_id=demo_id)
        assert svc.cache.get(demo_id, version) is not None, f"{step} did not bring the cached results up to date"
        cached = svc.snapshot(demo_id)  # brought up to date incrementally by the write
        svc.cache.drop(demo_id)
        full = svc.snapshot(demo_id)  # rebuilt from the rows
        assert cached.data_version == full.data_version
        assert json.dumps(cached.result.to_json(), sort_keys=True) == json.dumps(full.result.to_json(), sort_keys=True)
        assert dict(cached.circuit_versions[TAG]) == dict(full.circuit_versions[TAG]), step
        assert cached.model == full.model, step
        if step == "apply":
            r = client.post(_url(demo_id, "undo"), data=_form(applied, "balance-undo-form"), headers=htmx())
            assert r.status_code == 200


def test_history_shows_the_rearrangement_as_one_change(client, demo_id):
    client.post(_url(demo_id, "apply"), data=_form(_preview(client, demo_id), "balance-apply-form"), headers=htmx())
    page = client.get(f"/projects/{demo_id}/panels/{TAG}/history")
    assert page.status_code == 200
    rows = [tr for tr in parse(page.text).by_id("history").find_all("tr") if "act-balance" in tr.attrs.get("class", "")]
    assert rows and f"balance panel {TAG} slots" in rows[0].text
    assert any("Display wall" in tr.text for tr in rows)
