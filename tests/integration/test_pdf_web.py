"""The PDF buttons over HTTP: start a job (htmx fragment polling every 500 ms), follow it to the
download, and read the sheet back; bad sheet names get a clear message."""

from __future__ import annotations

import time

import pytest

from tests.integration.web import conftest as _web
from tests.integration.web.conftest import htmx
from tests.unit.pdf.pdftext import panel_pages, read_pages

_sqlite_template = _web._sqlite_template
_pg_database = _web._pg_database
db_url = _web.db_url
app = _web.app
client = _web.client
demo_data = _web.demo_data
demo_id = _web.demo_id


@pytest.fixture(autouse=True)
def _private_cache(tmp_path, monkeypatch):
    monkeypatch.setenv("PANELWRIGHT_PDF_CACHE_DIR", str(tmp_path / "pdf-cache"))


def _follow(client, url: str, timeout_s: float = 180.0) -> str:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        r = client.get(url, headers=htmx())
        assert r.status_code == 200, r.text
        if 'data-state="done"' in r.text or 'data-state="failed"' in r.text:
            return r.text
        assert 'hx-trigger="every 500ms"' in r.text  # still polling
        time.sleep(0.25)
    raise AssertionError("the PDF job did not finish in time")


def test_panel_button_renders_that_panel(client, demo_id):
    page = client.get(f"/projects/{demo_id}/pdf")
    assert page.status_code == 200
    assert 'name="sheets" value="LP-1"' in page.text and "Make the whole set" in page.text
    r = client.post(f"/projects/{demo_id}/pdf", data={"sheets": "LP-1"}, headers=htmx())
    assert r.status_code == 200, r.text
    assert 'hx-trigger="every 500ms"' in r.text or 'data-state="done"' in r.text
    job_url = r.text.split('hx-get="')[1].split('"')[0] if "hx-get" in r.text else None
    assert job_url is not None
    final = _follow(client, job_url)
    assert 'data-state="done"' in final, final
    link = final.split('class="pdf-download"')[0].rsplit('href="', 1)[1].split('"')[0]
    pdf = client.get(link)
    assert pdf.status_code == 200 and pdf.headers["content-type"] == "application/pdf"
    assert pdf.content.startswith(b"%PDF")
    pages = read_pages(pdf.content)
    assert list(panel_pages(pages)) == ["LP-1"]
    assert "DRAFT — not issued" in pages[0].flat  # nothing issued yet


def test_whole_set_without_htmx_redirects_to_the_job_page(client, demo_id):
    r = client.post(f"/projects/{demo_id}/pdf", data={"sheets": ""}, follow_redirects=False)
    assert r.status_code == 303
    page = client.get(r.headers["location"])
    assert page.status_code == 200 and "PDF set" in page.text
    final = _follow(client, r.headers["location"])
    assert 'data-state="done"' in final


def test_a_reviewer_may_print(app, client, demo_id):
    from tests.integration.web.conftest import sign_in

    sign_in(client, app, "reviewer")
    r = client.post(f"/projects/{demo_id}/pdf", data={"sheets": "T-1"}, headers=htmx())
    assert r.status_code == 200, r.text
    final = _follow(client, r.text.split('hx-get="')[1].split('"')[0])
    assert 'data-state="done"' in final


def test_unknown_sheet_is_refused_with_its_name(client, demo_id):
    r = client.post(f"/projects/{demo_id}/pdf", data={"sheets": "LP-77"}, headers=htmx())
    assert r.status_code == 404
    assert "LP-77" in r.text


def test_unknown_job_is_not_found(client, demo_id):
    r = client.get(f"/projects/{demo_id}/pdf/jobs/0123abcd")
    assert r.status_code == 404
