"""The load-growth sheet of a stored project's PDF set (issue 6: the chart of the browser's
Growth page, printable, with axis labels and units).

The demo project is stored, issued twice (an edit in between), and its set made as the web
button and ``panelwright pdf PROJECT`` make it.  The sheet embeds the very SVG text the Growth
page serves for the service, its table prints the plotted values, nothing leaves the sheet body,
and the content-hash cache re-renders the sheet exactly when a plotted value changes.  A set from
a bare project file (no revisions) has no growth sheet.
"""

from __future__ import annotations

import io
import re
from dataclasses import replace

import pdfplumber
import pytest
from click.testing import CliRunner
from fastapi.testclient import TestClient

from server import formatting as fmt
from server.calc.projectfile import dump_project, load_project_file
from server.pdf.issue import compute, history_for, make_set
from server.pdf.render import sheet_html
from server.pdf.sheets import build_sheets
from server.pdf.stored import growth_charts, stored_set
from tests.helpers import DEMO_FILE
from tests.unit.pdf.pdftext import content_box_pt, read_pages

TITLE = "LOAD GROWTH — SERVICE UTIL"


@pytest.fixture(scope="module")
def stored(tmp_path_factory):
    """The demo project in a SQLite database with revisions 1 and 2 issued."""
    from server.config import Settings
    from server.db.migrate import upgrade
    from server.db.session import make_engine, make_sessionmaker
    from server.services import Services

    folder = tmp_path_factory.mktemp("growth-db")
    url = f"sqlite:///{folder / 'pw.db'}"
    upgrade(url)
    engine = make_engine(Settings(database_url=url))
    svc = Services(make_sessionmaker(engine), cache_size=0)
    project = load_project_file(DEMO_FILE)
    pid = svc.create_project(dump_project(project))
    svc.issue_revision(pid, description="Issued for permit", issued_by="JK")
    svc.edit_circuit(pid, "LP-1", 1, {"va": "4200"})
    svc.issue_revision(pid, description="Tenant changes", issued_by="JK")
    yield url, svc, pid, project.project.number
    engine.dispose()


@pytest.fixture(scope="module")
def stored_pdf(stored, tmp_path_factory):
    _, svc, pid, _ = stored
    st = stored_set(svc, pid)
    cache = tmp_path_factory.mktemp("growth-cache")
    pdf, stats = make_set(st.model, st.result, st.history, cache_dir=cache, growth=st.growth)
    return st, pdf, cache, read_pages(pdf)


def _growth_page(pages):
    found = [p for p in pages if TITLE in p.flat]
    assert len(found) == 1, "one growth sheet for the demo's one service"
    return found[0]


def test_the_stored_set_has_a_growth_sheet_with_axes_units_and_figures(stored_pdf):
    st, _, _, pages = stored_pdf
    page = _growth_page(pages)
    text = page.flat
    # Axis labels with units, printed as text beside the chart (the chart's own lettering is drawn as paths).
    assert "Vertical axis: load (kVA)" in text
    assert "Horizontal axis: issued revision (and the working copy)" in text
    for head in ("CONNECTED LOAD (KVA)", "DEMAND LOAD (KVA)", "FUTURE LOADS (KVA)", "DEMAND WITH FUTURE LOADS (KVA)"):
        assert head in text
    # The table prints the plotted values: one row per snapshot, in order.
    rows = st.growth["UTIL"].rows
    assert [r.label for r in rows] == ["Rev 1", "Rev 2", "Working copy"]
    for r in rows:
        want = f"{r.label} {fmt.kva(r.connected_kva)} {fmt.kva(r.demand_kva)} {fmt.kva(r.future_kva)} "
        want += fmt.kva(r.demand_future_kva)
        assert want in text, f"row {want!r} not printed"
    # Revision 2 raised LP-1 circuit 1 to 4,200 VA: the connected load grew between the revisions.
    assert rows[1].connected_kva > rows[0].connected_kva
    # The sheet is listed in the index and carries both revisions in its title block.
    assert "Load growth — service UTIL" in pages[0].flat
    assert "Issued for permit" in page.strip and "Tenant changes" in page.strip
    assert "engineer of record" in text and "local amendments govern" in text


def test_the_embedded_chart_is_the_one_the_growth_page_serves(stored, stored_pdf):
    from server.config import Settings
    from server.web.app import create_app
    from tests.integration.web.conftest import sign_in

    url, _, pid, _ = stored
    st, *_ = stored_pdf
    spec = build_sheets(st.model, st.result, st.history, select=["growth"], growth=st.growth)[0]
    html = sheet_html(spec, st.model.project.paper)
    app = create_app(Settings(database_url=url))
    try:
        with TestClient(app, raise_server_exceptions=False) as client:
            sign_in(client, app, "engineer")
            served = client.get(f"/projects/{pid}/growth/nodes/UTIL/chart.svg")
            assert served.status_code == 200
            node_page = client.get(f"/projects/{pid}/growth/nodes/UTIL")
            assert node_page.status_code == 200
    finally:
        app.state.engine.dispose()
    svg = served.text
    assert svg.startswith("<svg") and "Load growth of UTIL" in svg
    assert svg in html, "the sheet embeds the chart.svg text unchanged"
    assert svg in node_page.text, "and the browser page shows the same chart"
    # matplotlib keeps each text as a comment beside its glyph paths: the axis labels carry units.
    assert "Load (kVA)" in svg and "Issued revision (and the working copy)" in svg


def test_the_chart_stays_inside_the_sheet_body(stored_pdf):
    st, pdf, _, pages = stored_pdf
    page = _growth_page(pages)
    paper = st.model.project.paper
    x0, top, x1, bottom = content_box_pt(paper)
    with pdfplumber.open(io.BytesIO(pdf)) as doc:
        p = doc.pages[page.index]
        drawn = [*p.curves, *p.lines, *p.rects]
        # The chart draws many paths (glyphs, lines, markers, hatching) in the body.
        inside = [o for o in drawn if x0 - 1 <= o["x0"] < x1 and top - 1 <= o["top"] < bottom]
        assert len(inside) > 50
        for o in inside:
            assert o["x1"] <= x1 + 1 and o["bottom"] <= bottom + 1, (
                f"a chart path leaves the body: {o['x1'], o['bottom']}"
            )
    for w in page.words:
        if w["x0"] < x1 - 1 and w["top"] < bottom - 1:
            assert w["x1"] <= x1 + 1 and w["bottom"] <= bottom + 1, f"{w['text']!r} leaves the sheet body"


@pytest.mark.parametrize("paper", ["letter-portrait", "letter-landscape"])
def test_other_papers_fit(stored_pdf, paper, tmp_path):
    st, *_ = stored_pdf
    model = replace(st.model, project=replace(st.model.project, paper=paper))
    pdf, _ = make_set(model, st.result, st.history, select=["growth"], cache_dir=tmp_path, growth=st.growth)
    pages = read_pages(pdf, paper)
    assert len(pages) == 1 and TITLE in pages[0].flat
    x0, top, x1, bottom = content_box_pt(paper)
    with pdfplumber.open(io.BytesIO(pdf)) as doc:
        for o in [*doc.pages[0].curves, *doc.pages[0].lines]:
            if x0 - 1 <= o["x0"] < x1 and top - 1 <= o["top"] < bottom:
                assert o["x1"] <= x1 + 1 and o["bottom"] <= bottom + 1, f"{paper}: a chart path leaves the body"
    for w in pages[0].words:
        if w["x0"] < x1 - 1 and w["top"] < bottom - 1:
            assert w["x1"] <= x1 + 1 and w["bottom"] <= bottom + 1, f"{paper}: {w['text']!r} leaves the sheet body"


def test_cache_re_renders_the_growth_sheet_when_a_plotted_value_changes(stored, stored_pdf):
    _, svc, pid, _ = stored
    st, _, cache, _ = stored_pdf
    again = stored_set(svc, pid)
    _, stats = make_set(again.model, again.result, again.history, cache_dir=cache, growth=again.growth)
    assert stats.rendered == 0 and stats.from_cache == stats.sheets
    before = sheet_html(
        build_sheets(st.model, st.result, st.history, select=["growth"], growth=st.growth)[0], "tabloid-landscape"
    )
    svc.edit_circuit(pid, "LP-1", 1, {"va": "5200"})  # the working copy's point moves up
    try:
        moved = stored_set(svc, pid)
        after = sheet_html(
            build_sheets(moved.model, moved.result, moved.history, select=["growth"], growth=moved.growth)[0],
            "tabloid-landscape",
        )
        assert before != after
        assert moved.growth["UTIL"].rows[-1].connected_kva > st.growth["UTIL"].rows[-1].connected_kva
        _, stats = make_set(
            moved.model, moved.result, moved.history, select=["growth"], cache_dir=cache, growth=moved.growth
        )
        assert stats.rendered == 1 and stats.from_cache == 0
    finally:
        svc.edit_circuit(pid, "LP-1", 1, {"va": "4200"})


def test_a_project_file_or_an_unissued_project_has_no_growth_sheet(stored, tmp_path):
    project = load_project_file(DEMO_FILE)
    result = compute(project)
    pdf, _ = make_set(project, result, history_for(project, result, current=None), cache_dir=tmp_path)
    assert not any("LOAD GROWTH" in p.flat for p in read_pages(pdf))
    with pytest.raises(KeyError, match="growth"):
        build_sheets(project, result, select=["growth"])
    _, svc, _, _ = stored
    fresh = svc.create_project(dump_project(replace(project, project=replace(project.project, number="26-999"))))
    assert growth_charts(svc, fresh) == {}
    assert stored_set(svc, fresh).growth == {}


def test_the_cli_prints_the_growth_sheet_of_a_stored_project(stored, tmp_path, monkeypatch):
    from server.commands.pdf import command

    url, _, _, number = stored
    monkeypatch.setenv("PANELWRIGHT_DATABASE_URL", url)
    monkeypatch.setenv("PANELWRIGHT_PDF_CACHE_DIR", str(tmp_path / "cache"))
    out = tmp_path / "growth.pdf"
    r = CliRunner().invoke(command, [number, "--out", str(out), "--sheets", "growth"], catch_exceptions=False)
    assert r.exit_code == 0, r.output
    pages = read_pages(out.read_bytes())
    assert len(pages) == 1 and TITLE in pages[0].flat
    assert re.search(r"Working copy [\d,.]+ [\d,.]+", pages[0].flat)
