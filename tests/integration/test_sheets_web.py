"""The spreadsheet screens over HTTP: upload, mapping corrections (htmx), preview, confirm, refusals, exports.

Reuses the web tests' fixtures (a migrated SQLite database per test, PostgreSQL too when
``PANELWRIGHT_TEST_PG_URL`` is set, the app and a TestClient, the demo project).
"""

from __future__ import annotations

import io
import re

import openpyxl
import pytest

from server.commands import CAUTION
from server.sheets.uploads import UploadStore
from tests.integration.web import conftest as _web
from tests.integration.web.conftest import htmx
from tests.integration.web.html import parse
from tests.unit.sheets.conftest import messy_xlsx
from tests.unit.sheets.test_limits import zip_bomb

# The web tests' fixtures, shared: a migrated database per test (SQLite; PostgreSQL when configured),
# the app, its TestClient and the demo project.
_sqlite_template = _web._sqlite_template
_pg_database = _web._pg_database
db_url = _web.db_url
app = _web.app
client = _web.client
demo_data = _web.demo_data
demo_id = _web.demo_id


@pytest.fixture(autouse=True)
def _private_uploads(request, tmp_path):
    """Each test's uploads wait in its own folder (only for tests that run the app)."""
    if "app" in request.fixturenames:
        request.getfixturevalue("app").state.sheet_uploads = UploadStore(tmp_path / "uploads")


def _leaf(app, pid):
    model = app.state.services.snapshot(pid).model
    return next(p for p in model.panels if not any(c.feeds for c in p.circuits) and "Y/" in p.system)


def _upload(client, pid, name, data, target):
    return client.post(
        f"/projects/{pid}/sheets/upload",
        data={"target": target},
        files={"file": (name, data, "application/octet-stream")},
        follow_redirects=False,
    )


def _form_of(html: str) -> dict[str, str]:
    """The values the mapping form would submit (inputs and selected options)."""
    doc = parse(html)
    form = doc.by_id("import-form")
    values: dict[str, str] = {}
    for node in form.iter():
        name = node.attrs.get("name")
        if not name:
            continue
        if node.tag == "input":
            values[name] = node.attrs.get("value", "")
        elif node.tag == "select":
            chosen = [o for o in node.find_all("option") if "selected" in o.attrs]
            values[name] = (chosen[0] if chosen else node.find("option")).attrs.get("value", "")
    return values


def _preview_row(html: str, slot: int):
    doc = parse(html)
    return doc.find("tr", data_slot=str(slot))


def test_upload_correct_a_column_confirm(client, app, demo_id):
    leaf = _leaf(app, demo_id)
    r = _upload(client, demo_id, "messy.xlsx", messy_xlsx(), leaf.tag)
    assert r.status_code == 303
    work = r.headers["location"]
    page = client.get(work)
    assert page.status_code == 200
    assert CAUTION in parse(page.text).by_id("caution").text
    rtu = _preview_row(page.text, 5)
    assert rtu.find("td", data_field="va").text == "9,600"  # kVA column guessed
    form = _form_of(page.text)
    assert form["plan-0-col-4"] == "kva"
    # nothing written yet
    version = app.state.services.snapshot(demo_id).data_version
    # the user says column E is VA: the htmx preview shows 10 VA (9.6 rounded) for the same row
    form["plan-0-col-4"] = "va"
    token = work.split("/imports/")[1].split("?")[0]
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/preview", data=form, headers=htmx("plan-0-col-4"))
    assert r.status_code == 200 and 'id="import-work"' in r.text and "<html" not in r.text
    assert _preview_row(r.text, 5).find("td", data_field="va").text == "10"
    # and back to kVA, then confirm
    form = _form_of(r.text)
    form["plan-0-col-4"] = "kva"
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/commit", data=form, follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].endswith(f"/panels/{leaf.tag}")
    snap = app.state.services.snapshot(demo_id)
    assert snap.data_version == version + 1
    panel = snap.model.panel(leaf.tag)
    assert [c.slot for c in panel.circuits] == [1, 2, 3, 4, 5, 8, 11]
    assert panel.circuit_at(5).va == 9600.0
    # the held upload is gone once confirmed
    assert client.get(work).status_code == 404


def test_preview_marks_problem_cells_and_refuses_to_commit(client, app, demo_id):
    leaf = _leaf(app, demo_id)
    data = b'Ckt,Description,Poles,VA,Type\n1,Big,3,3000,Lighting\n3,"<script>window.x=1</script>",1,500,Gizmo\n'
    r = _upload(client, demo_id, "clash.csv", data, leaf.tag)
    page = client.get(r.headers["location"])
    row = _preview_row(page.text, 3)
    assert "mark-error" in row.find("td", data_field="slot").attrs["class"]
    assert "mark-warning" in row.find("td", data_field="category").attrs["class"]
    assert "overlap" in row.find("td", class_="problems").text
    assert "<script>window.x=1</script>" not in page.text  # autoescaped
    assert "&lt;script&gt;window.x=1&lt;/script&gt;" in page.text
    confirm = parse(page.text).by_id("confirm-import")
    assert "disabled" in confirm.attrs
    before = app.state.services.snapshot(demo_id)
    token = r.headers["location"].split("/imports/")[1].split("?")[0]
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/commit", data=_form_of(page.text))
    assert r.status_code == 422 and "Not written: 1 errors" in r.text
    after = app.state.services.snapshot(demo_id)
    assert after.data_version == before.data_version and after.model == before.model


def test_commit_after_someone_else_changed_the_project_writes_nothing(client, app, demo_id):
    leaf = _leaf(app, demo_id)
    r = _upload(client, demo_id, "m.xlsx", messy_xlsx(), leaf.tag)
    page = client.get(r.headers["location"])
    form = _form_of(page.text)
    other = next(p for p in app.state.services.snapshot(demo_id).model.panels if p.tag != leaf.tag)
    app.state.services.update_panel(demo_id, other.tag, {"location": "Moved meanwhile"})
    token = r.headers["location"].split("/imports/")[1].split("?")[0]
    before = app.state.services.snapshot(demo_id)
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/commit", data=form)
    assert r.status_code == 409 and "changed after this preview" in r.text
    assert app.state.services.snapshot(demo_id).model == before.model


@pytest.mark.parametrize(
    ("name", "data", "message"),
    [
        ("notes.xlsx", b"plain text", "is not an XLSX workbook"),
        ("bomb.xlsx", None, "zip bomb"),
        ("macro.xlsm", b"PK\x03\x04", "macro-enabled"),
    ],
)
def test_bad_uploads_are_refused_with_a_message(client, app, demo_id, name, data, message):
    data = zip_bomb(200) if data is None else data
    before = app.state.services.snapshot(demo_id)
    r = _upload(client, demo_id, name, data, "auto")
    assert r.status_code == 422
    err = parse(r.text).by_id("upload-error")
    assert err is not None and message in err.text and name in err.text
    assert app.state.services.snapshot(demo_id).data_version == before.data_version


def test_upload_over_the_limit(client, app, demo_id, monkeypatch):
    monkeypatch.setenv("PANELWRIGHT_MAX_UPLOAD_MB", "0.01")
    r = _upload(client, demo_id, "big.csv", b"Ckt,Description,VA\n" + b"1,x,1\n" * 5000, "auto")
    assert r.status_code in (413, 422)
    message = parse(r.text).by_id("upload-error").text
    assert "uploads are limited to" in message and "PANELWRIGHT_MAX_UPLOAD_MB" in message
    if r.status_code == 422:  # read in full: the message gives the file's real size
        assert "big.csv: the file is 29 kB; uploads are limited to 10 kB" in message


def test_discard_writes_nothing(client, app, demo_id):
    leaf = _leaf(app, demo_id)
    r = _upload(client, demo_id, "m.xlsx", messy_xlsx(), leaf.tag)
    token = r.headers["location"].split("/imports/")[1].split("?")[0]
    before = app.state.services.snapshot(demo_id)
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/discard", follow_redirects=True)
    assert r.status_code == 200 and "nothing was written" in r.text
    assert app.state.services.snapshot(demo_id).model == before.model


def test_exports_download_and_round_trip(client, app, demo_id):
    r = client.get(f"/projects/{demo_id}/sheets/export.xlsx")
    assert r.status_code == 200 and r.content.startswith(b"PK")
    assert re.search(r'filename="26-041-schedules\.xlsx"', r.headers["content-disposition"])
    wb = openpyxl.load_workbook(io.BytesIO(r.content))
    assert wb.sheetnames[0] == "Summary"
    csv = client.get(f"/projects/{demo_id}/sheets/circuits.csv")
    assert csv.status_code == 200 and csv.text.lstrip("\ufeff").startswith("Panel,Slot,Poles")
    summary = client.get(f"/projects/{demo_id}/sheets/summary.csv")
    assert CAUTION in summary.text
    # the whole-project CSV imports back unchanged (every panel, through the Panel column)
    before = app.state.services.snapshot(demo_id)
    up = _upload(client, demo_id, "all.csv", csv.content, "auto")
    page = client.get(up.headers["location"])
    token = up.headers["location"].split("/imports/")[1].split("?")[0]
    r = client.post(
        f"/projects/{demo_id}/sheets/imports/{token}/commit", data=_form_of(page.text), follow_redirects=False
    )
    assert r.status_code == 303
    after = app.state.services.snapshot(demo_id)
    assert after.model == before.model and after.data_version == before.data_version + 1


def test_index_page(client, demo_id):
    r = client.get(f"/projects/{demo_id}/sheets")
    assert r.status_code == 200
    doc = parse(r.text)
    assert doc.by_id("upload-form") is not None and doc.by_id("export-xlsx") is not None
    assert "macro-enabled workbooks (.xlsm) are refused" in r.text


def _book_two_sheets():
    from server.sheets import read_upload

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "First"
    ws.append(["Title block"])
    ws.append(["Ckt", "Description", "kVA", "Amps"])
    ws.append([1, "A", 1.5, 20])
    second = wb.create_sheet("Second")
    second.append(["Slot", "Name", "VA"])
    second.append([2, "B", 300])
    buf = io.BytesIO()
    wb.save(buf)
    return read_upload(buf.getvalue(), "two.xlsx")


def test_mapping_form_changes():
    from server.web.routes.sheets import plans_from_form

    book = _book_two_sheets()
    base = {
        "plan-count": "1",
        "plan-0-sheet": "First",
        "plan-0-sheet-was": "First",
        "plan-0-panel": "LP-1",
        "plan-0-header_row": "2",
        "plan-0-header_row-was": "2",
        "plan-0-col-0": "slot",
        "plan-0-col-1": "description",
        "plan-0-col-2": "kva",
        "plan-0-col-3": "breaker",
    }
    (plan,) = plans_from_form(book, base, None)
    assert [r.value for r in plan.mapping.roles] == ["slot", "description", "kva", "breaker"]
    # the control just changed takes the role from the column that had it
    (plan,) = plans_from_form(book, {**base, "plan-0-col-3": "slot"}, "plan-0-col-3")
    assert [r.value for r in plan.mapping.roles] == ["ignore", "description", "kva", "slot"]
    # two load columns without a trigger: the first keeps it
    (plan,) = plans_from_form(book, {**base, "plan-0-col-3": "amps"}, None)
    assert [r.value for r in plan.mapping.roles] == ["slot", "description", "kva", "ignore"]
    # a new header row re-guesses from that row
    (plan,) = plans_from_form(book, {**base, "plan-0-header_row": "1"}, "plan-0-header_row")
    assert plan.mapping.header_row == 0 and plan.mapping.headers[0] == "Title block"
    # a new sheet re-guesses from that sheet
    (plan,) = plans_from_form(book, {**base, "plan-0-sheet": "Second"}, "plan-0-sheet")
    assert plan.sheet == "Second" and [r.value for r in plan.mapping.roles] == ["slot", "description", "va"]
    # junk in the form is ignored, never a traceback
    (plan,) = plans_from_form(book, {**base, "plan-0-col-2": "<b>"}, None)
    assert plan.mapping.roles[2].value == "ignore"
    (plan,) = plans_from_form(book, {**base, "plan-0-header_row": "x"}, None)
    assert plan.mapping.header_row == 0


def test_preview_shows_other_stored_fields_and_marks_their_errors(client, app, demo_id):
    leaf = _leaf(app, demo_id)
    data = b"Ckt,Description,VA,PF,Status\n1,Fan,500,0.85,existing\n2,Pump,500,1.5,new\n"
    r = _upload(client, demo_id, "o.csv", data, leaf.tag)
    page = client.get(r.headers["location"])
    assert _preview_row(page.text, 1).find("td", data_field="other").text == "pf 0.85; existing"
    bad = _preview_row(page.text, 2)
    assert "mark-error" in bad.find("td", data_field="other").attrs["class"]
    assert "pf" in bad.find("td", class_="problems").text and "must be at most 1" in bad.text


def test_workbook_with_a_sheet_per_panel_imports_every_panel(client, app, demo_id):
    before = app.state.services.snapshot(demo_id)
    xlsx = client.get(f"/projects/{demo_id}/sheets/export.xlsx").content
    up = _upload(client, demo_id, "set.xlsx", xlsx, "auto")
    page = client.get(up.headers["location"])
    doc = parse(page.text)
    legends = [f.find("legend").text for f in doc.find_all("fieldset", class_="sheet-plan")]
    assert legends == [f"Sheet “{p.tag}” → panel {p.tag}" for p in before.model.panels]  # the Summary sheet is skipped
    token = up.headers["location"].split("/imports/")[1].split("?")[0]
    r = client.post(
        f"/projects/{demo_id}/sheets/imports/{token}/commit", data=_form_of(page.text), follow_redirects=False
    )
    assert r.status_code == 303 and r.headers["location"].endswith("/tree")
    assert app.state.services.snapshot(demo_id).model == before.model


def test_two_column_schedule_proposed_corrected_and_confirmed(client, app, demo_id):
    from tests.unit.sheets.test_two_column import messy_two_column_xlsx

    leaf = _leaf(app, demo_id)
    r = _upload(client, demo_id, "two.xlsx", messy_two_column_xlsx(), leaf.tag)
    assert r.status_code == 303
    work = r.headers["location"]
    token = work.split("/imports/")[1].split("?")[0]
    page = client.get(work)
    assert page.status_code == 200
    doc = parse(page.text)
    # the proposal: two circuits per row, the right half from column G, each half with its own columns
    form = _form_of(page.text)
    assert form["plan-0-layout"] == "two-column" and form["plan-0-split"] == "G"
    assert "columns A–F are the left half (odd slots), G–K the right half" in doc.by_id("plan-0-halves").text
    assert [form[f"plan-0-col-{i}"] for i in range(11)] == [
        "slot",
        "description",
        "kva",
        "breaker",
        "poles",
        "phase",
        "breaker",
        "poles",
        "kva",
        "description",
        "slot",
    ]
    sides = [th.attrs.get("data-side") for th in doc.find("table", class_="mapping").find_all("th")]
    assert sides == ["left"] * 5 + ["both halves"] + ["right"] * 5
    ahu = _preview_row(page.text, 4)
    assert ahu.attrs["data-side"] == "right"
    assert ahu.find("td", data_field="poles").text == "3" and ahu.find("td", data_field="va").text == "9,600"
    assert "continues the breaker at slot 4" in doc.find("tr", data_row="9", data_side="right").text
    # the user says the right half's load column is VA: only the right half changes
    form["plan-0-col-8"] = "va"
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/preview", data=form, headers=htmx("plan-0-col-8"))
    assert r.status_code == 200 and "<html" not in r.text
    assert _preview_row(r.text, 4).find("td", data_field="va").text == "10"  # 9.6 read as VA
    assert _preview_row(r.text, 3).find("td", data_field="va").text == "600"  # left half still kVA
    # switching to one circuit per row re-guesses a single-column map (the right half is not read)
    form = _form_of(r.text)
    form["plan-0-layout"] = "single"
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/preview", data=form, headers=htmx("plan-0-layout"))
    single = _form_of(r.text)
    assert single["plan-0-layout"] == "single" and "plan-0-split" not in single
    assert _preview_row(r.text, 4) is None
    # and back to two circuits per row: the halves are proposed again; confirm
    single["plan-0-layout"] = "two-column"
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/preview", data=single, headers=htmx("plan-0-layout"))
    form = _form_of(r.text)
    assert form["plan-0-split"] == "G" and form["plan-0-col-8"] == "kva"
    version = app.state.services.snapshot(demo_id).data_version
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/commit", data=form, follow_redirects=False)
    assert r.status_code == 303, r.text[:2000]
    snap = app.state.services.snapshot(demo_id)
    assert snap.data_version == version + 1
    panel = snap.model.panel(leaf.tag)
    got = {c.slot: (c.poles, c.description, c.va, c.breaker_amps) for c in panel.circuits}
    assert got == {
        1: (1, "Lighting - open office", 1200.0, 20),
        2: (1, "Receptacles - open office", 900.0, 20),
        3: (1, "Lighting - corridor", 600.0, 20),
        4: (3, "AHU-2", 9600.0, 40),
        5: (2, "Water heater", 4500.0, 30),
        9: (1, "Spare", None, 20),
        10: (0, "Space", None, None),
        11: (1, "Copier", 1500.0, 20),
        12: (1, "Exhaust fan", 500.0, 20),
    }


def test_two_column_slot_claimed_twice_is_refused_naming_row_and_column(client, app, demo_id):
    leaf = _leaf(app, demo_id)
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["CKT", "DESCRIPTION", "VA", "TRIP", "TRIP", "VA", "DESCRIPTION", "CKT"])
    ws.append([5, "Lights", 500, 20, 20, 500, "Fan", 6])
    ws.append([7, "Heater", 1500, 20, 20, 300, "Sign", 7])
    buf = io.BytesIO()
    wb.save(buf)
    r = _upload(client, demo_id, "dup.xlsx", buf.getvalue(), leaf.tag)
    page = client.get(r.headers["location"])
    sign = parse(page.text).find("tr", data_row="3", data_side="right")
    assert "mark-error" in sign.find("td", data_field="slot").attrs["class"]
    assert "column H (slot): slot 7 is claimed twice: by the left half of row 3 (column A)" in sign.text
    assert "disabled" in parse(page.text).by_id("confirm-import").attrs
    before = app.state.services.snapshot(demo_id)
    token = r.headers["location"].split("/imports/")[1].split("?")[0]
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/commit", data=_form_of(page.text))
    assert r.status_code == 422 and "Not written" in r.text
    assert app.state.services.snapshot(demo_id).model == before.model


def test_two_column_export_downloads_and_imports_back(client, app, demo_id):
    page = client.get(f"/projects/{demo_id}/sheets")
    link = parse(page.text).by_id("export-xlsx-two-column")
    r = client.get(link.attrs["href"])
    assert r.status_code == 200 and 'schedules-two-column.xlsx"' in r.headers["content-disposition"]
    assert client.get(f"/projects/{demo_id}/sheets/export.xlsx?layout=diagonal").status_code == 422
    before = app.state.services.snapshot(demo_id)
    up = _upload(client, demo_id, "two.xlsx", r.content, "auto")
    page = client.get(up.headers["location"])
    form = _form_of(page.text)
    assert {v for k, v in form.items() if k.endswith("-layout")} == {"two-column"}
    token = up.headers["location"].split("/imports/")[1].split("?")[0]
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/commit", data=form, follow_redirects=False)
    assert r.status_code == 303
    assert app.state.services.snapshot(demo_id).model == before.model


@pytest.mark.parametrize(("layout", "split"), [("two-column", "A"), ("two-column", "ZZZ"), ("sideways", "C"), ("", "")])
def test_odd_layout_controls_give_a_page_not_an_error(client, app, demo_id, layout, split):
    from tests.unit.sheets.test_two_column import messy_two_column_xlsx

    leaf = _leaf(app, demo_id)
    r = _upload(client, demo_id, "two.xlsx", messy_two_column_xlsx(), leaf.tag)
    token = r.headers["location"].split("/imports/")[1].split("?")[0]
    form = _form_of(client.get(r.headers["location"]).text)
    form["plan-0-layout"], form["plan-0-split"] = layout, split
    r = client.post(f"/projects/{demo_id}/sheets/imports/{token}/preview", data=form, headers=htmx("plan-0-split"))
    assert r.status_code == 200 and 'id="import-work"' in r.text
    shown = _form_of(r.text)
    if layout == "two-column":
        assert shown["plan-0-layout"] == "two-column" and shown["plan-0-split"] == "G"  # detected again
    else:
        assert shown["plan-0-layout"] == "single"
