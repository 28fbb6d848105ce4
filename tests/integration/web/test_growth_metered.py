"""Metered existing load (NEC 220.87) in the web app: upload → analysis (nothing stored) → confirm → used.

The recording is invented: 31 days of 15-minute kVA readings for LP-1, 20 kVA flat with one
planted 15-minute peak of 40 kVA, so the existing load is 1.25 × 40 = 50 kVA (NEC 220.87: the
maximum demand at 125 %, 30-day alternative; NFPA 70-2023, from memory).
"""

from __future__ import annotations

from datetime import datetime, timedelta

from server.calc.demand import METERED_EXISTING
from tests.helpers import assert_close
from tests.integration.web.html import parse

PEAK_AT = datetime(2026, 3, 10, 14, 15)


def _csv(bad_line_text: str | None = None) -> bytes:
    rows = ["timestamp,kVA"]
    t = datetime(2026, 3, 1)
    for _ in range(31 * 96):
        rows.append(f"{t:%Y-%m-%d %H:%M},{40.0 if t == PEAK_AT else 20.0}")
        t += timedelta(minutes=15)
    if bad_line_text is not None:
        rows.insert(5, bad_line_text)  # physical line 6 of the file
    return ("\n".join(rows) + "\n").encode()


def _upload(client, pid: int, data: bytes, **extra):
    form = {"node": "LP-1", "pf": "0.9", "tz": "", **extra}
    return client.post(
        f"/projects/{pid}/growth/metered/preview", data=form, files={"file": ("lp1-march.csv", data, "text/csv")}
    )


def _stored(app, pid: int) -> list:
    from server.growth import Growth

    return Growth(app.state.services).metered_rows(pid)


def test_bad_row_is_reported_with_its_line_and_nothing_is_stored_until_confirmed(client, app, demo_id):
    svc = app.state.services
    before = svc.snapshot(demo_id)
    r = _upload(client, demo_id, _csv("2026-03-01 01:00,not-a-number"))
    assert r.status_code == 200
    doc = parse(r.text)
    bad = doc.by_id("bad-rows")
    assert bad is not None and "6" in [td.text for td in bad.find_all("td")]
    assert "not-a-number" in bad.text
    assert "50.0 kVA" in doc.by_id("metered-analysis").find("td", data_role="existing").text
    assert doc.by_id("metered-chart").find("svg") is not None
    # Analysed, not stored: no row, same data version, same results.
    assert _stored(app, demo_id) == []
    assert svc.snapshot(demo_id).data_version == before.data_version
    # Confirm: stored and used by the calculation everywhere (the snapshot the pages, API and PDF read).
    form = doc.by_id("metered-confirm-form")
    fields = {i.attrs["name"]: i.attrs.get("value", "") for i in form.find_all("input")}
    r = client.post(f"/projects/{demo_id}/growth/metered/confirm", data=fields, follow_redirects=False)
    assert r.status_code == 303
    rows = _stored(app, demo_id)
    assert len(rows) == 1 and rows[0].active and rows[0].node_tag == "LP-1" and rows[0].bad_rows == 1
    assert rows[0].uploaded_by == "engineer" and rows[0].file_name == "lp1-march.csv"
    assert_close(rows[0].existing_load_kva, 50.0, rel=1e-9)
    after = svc.snapshot(demo_id)
    lp1 = after.result.panels["LP-1"]
    assert_close(lp1.connected_by_category[METERED_EXISTING], 50_000.0, rel=1e-9)
    assert after.data_version == before.data_version + 1
    api = client.get(f"/api/projects/{demo_id}/results").json()
    assert_close(api["panels"]["LP-1"]["demand_va"], lp1.demand_va, rel=1e-6)
    # The same token cannot be confirmed twice.
    r = client.post(f"/projects/{demo_id}/growth/metered/confirm", data=fields)
    assert r.status_code == 422 and "upload it again" in r.text
    # Stop using it: the schedules count again.
    r = client.post(f"/projects/{demo_id}/growth/metered/{rows[0].id}/active", data={"active": "false"})
    assert r.status_code in (200, 303)
    assert svc.snapshot(demo_id).result.panels["LP-1"].demand_va == before.result.panels["LP-1"].demand_va


def test_strict_upload_with_a_bad_row_is_refused_whole(client, app, demo_id):
    r = _upload(client, demo_id, _csv("2026-03-01 01:00,-5"), strict="on")
    assert r.status_code == 422
    doc = parse(r.text)
    assert "nothing was imported" in doc.by_id("metered-refusal").text
    lines = [tr.find("td").text for tr in doc.by_id("bad-rows-refused").find_all("tr") if tr.find("td")]
    assert lines == ["6"]
    assert _stored(app, demo_id) == []


def test_unknown_node_and_missing_file_are_named(client, app, demo_id):
    r = client.post(
        f"/projects/{demo_id}/growth/metered/preview",
        data={"node": "NOPE", "pf": "0.9"},
        files={"file": ("x.csv", b"timestamp,kVA\n", "text/csv")},
    )
    assert r.status_code == 422 and "choose a source, transformer or panel" in r.text
    r = client.post(f"/projects/{demo_id}/growth/metered/preview", data={"node": "LP-1"})
    assert r.status_code == 422 and "choose a CSV file" in r.text
    r = _upload(client, demo_id, b"timestamp,kVA\n2026-03-01 00:00,1\n")
    assert r.status_code == 422 and "two usable readings" in r.text
    r = _upload(client, demo_id, b"timestamp,kVA\n2026-03-01 00:00,1\n2026-03-01 00:15,2\n")
    assert r.status_code == 200 and "metered-confirm-form" not in r.text  # under 30 days: nothing to store
    assert _stored(app, demo_id) == []
