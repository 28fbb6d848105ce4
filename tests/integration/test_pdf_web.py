"""The PDF buttons over HTTP: start a job (htmx fragment polling every 500 ms), follow it to the
download, and read the sheet back; bad sheet names get a clear message."""

from __future__ import annotations

import pytest

from tests.integration.pdfjobs import follow_job, private_pdf_cache  # noqa: F401 - autouse fixture
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


def test_panel_button_renders_that_panel(client, demo_id):
    page = client.get(f"/projects/{demo_id}/pdf")
    assert page.status_code == 200
    assert 'name="sheets" value="LP-1"' in page.text and "Make the whole set" in page.text
    r = client.post(f"/projects/{demo_id}/pdf", data={"sheets": "LP-1"}, headers=htmx())
    assert r.status_code == 200, r.text
    assert 'hx-trigger="every 500ms"' in r.text or 'data-state="done"' in r.text
    job_url = r.text.split('hx-get="')[1].split('"')[0] if "hx-get" in r.text else None
    assert job_url is not None
    final = follow_job(client, job_url)
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
    final = follow_job(client, r.headers["location"])
    assert 'data-state="done"' in final


def test_a_reviewer_may_print(app, client, demo_id):
    from tests.integration.web.conftest import sign_in

    sign_in(client, app, "reviewer")
    r = client.post(f"/projects/{demo_id}/pdf", data={"sheets": "T-1"}, headers=htmx())
    assert r.status_code == 200, r.text
    final = follow_job(client, r.text.split('hx-get="')[1].split('"')[0])
    assert 'data-state="done"' in final


def test_unknown_sheet_is_refused_with_its_name(client, demo_id):
    r = client.post(f"/projects/{demo_id}/pdf", data={"sheets": "LP-77"}, headers=htmx())
    assert r.status_code == 404
    assert "LP-77" in r.text


def test_unknown_job_is_not_found(client, demo_id):
    r = client.get(f"/projects/{demo_id}/pdf/jobs/0123abcd")
    assert r.status_code == 404


# --- finished sets on disk: a restart keeps them (records beside the PDFs in <cache>/sets) ---


def _run_job(client, pid: int, sheets: str) -> tuple[str, bytes]:
    """Start a job for ``sheets``, wait for it, download it: (download URL, PDF bytes)."""
    r = client.post(f"/projects/{pid}/pdf", data={"sheets": sheets}, headers=htmx())
    assert r.status_code == 200, r.text
    final = follow_job(client, r.text.split('hx-get="')[1].split('"')[0])
    assert 'data-state="done"' in final, final
    link = final.split('class="pdf-download"')[0].rsplit('href="', 1)[1].split('"')[0]
    pdf = client.get(link)
    assert pdf.status_code == 200 and pdf.content.startswith(b"%PDF")
    return link, pdf.content


def _restarted(db_url: str, **settings):
    """A new app on the same database and (through the environment) the same PDF cache folder."""
    from fastapi.testclient import TestClient

    from server.config import Settings
    from server.web.app import create_app
    from tests.integration.web.conftest import sign_in

    new_app = create_app(Settings(database_url=db_url, **settings))
    new_client = TestClient(new_app, raise_server_exceptions=False)
    new_client.__enter__()
    sign_in(new_client, new_app, "reviewer")  # reviewers may read the list and download
    return new_app, new_client


def _close(new_app, new_client) -> None:
    new_client.__exit__(None, None, None)
    if getattr(new_app.state, "pdf_jobs", None) is not None:
        new_app.state.pdf_jobs.shutdown()
    new_app.state.engine.dispose()


def test_finished_set_is_listed_and_downloads_after_a_restart(client, demo_id, db_url, tmp_path):
    import json

    link, first = _run_job(client, demo_id, "LP-1")
    job_id = link.split("/jobs/")[1].split("/")[0]
    sets = tmp_path / "pdf-cache" / "sets"
    record = json.loads((sets / f"{job_id}.json").read_text())
    assert record["job_id"] == job_id and record["project_id"] == demo_id
    assert record["sheets"] == ["LP-1"] and record["revision"] == "draft" and record["started_by"] == "engineer"
    assert record["size_bytes"] == len(first) and record["pages"] >= 1
    assert record["file"] == f"{job_id}.pdf" and record["download_name"].endswith("-LP-1.pdf")
    import hashlib

    assert record["sha256"] == hashlib.sha256(first).hexdigest()

    new_app, new_client = _restarted(db_url)
    try:
        page = new_client.get(f"/projects/{demo_id}/pdf")
        assert page.status_code == 200
        assert f'data-job="{job_id}"' in page.text and link in page.text and "engineer" in page.text
        again = new_client.get(link)
        assert again.status_code == 200 and again.content == first
        status = new_client.get(f"/projects/{demo_id}/pdf/jobs/{job_id}", headers=htmx())
        assert 'data-state="done"' in status.text
        # the set belongs to its project: another project id does not reach it
        assert new_client.get(f"/projects/{demo_id + 1000}/pdf/jobs/{job_id}/download").status_code == 404
    finally:
        _close(new_app, new_client)


@pytest.mark.parametrize(
    "job_id",
    # a bare ".." is resolved by the client before it is sent, so the attempts keep it inside one segment
    ["..%2F..%2Fetc%2Fpasswd", "..%2F" + "0" * 32, "0" * 32, "A" * 32, "0123abcd.pdf", "..%2Fsets%2Fx"],
)
def test_job_ids_outside_the_registry_are_not_found(client, demo_id, job_id, tmp_path):
    sets = tmp_path / "pdf-cache" / "sets"
    sets.mkdir(parents=True, exist_ok=True)
    (sets / ("0" * 32 + ".pdf")).write_bytes(b"%PDF not a job of ours")  # a file without a record
    for suffix in ("", "/download"):
        r = client.get(f"/projects/{demo_id}/pdf/jobs/{job_id}{suffix}")
        assert r.status_code == 404, (job_id, suffix, r.status_code)
        assert "Traceback" not in r.text


def test_corrupt_or_misplaced_records_are_skipped(client, demo_id, db_url, tmp_path, caplog):
    import json
    import logging
    import uuid

    link, first = _run_job(client, demo_id, "LP-1")
    sets = tmp_path / "pdf-cache" / "sets"
    broken = uuid.uuid4().hex
    (sets / f"{broken}.json").write_text("{ this is not JSON")
    outside_id = uuid.uuid4().hex
    good = json.loads((sets / (link.split("/jobs/")[1].split("/")[0] + ".json")).read_text())
    (tmp_path / "secret.pdf").write_bytes(b"%PDF outside the sets folder")
    (sets / f"{outside_id}.json").write_text(
        json.dumps({**good, "job_id": outside_id, "file": "../../secret.pdf", "size_bytes": 28})
    )
    with caplog.at_level(logging.WARNING, logger="panelwright.pdf"):
        new_app, new_client = _restarted(db_url)
        try:
            page = new_client.get(f"/projects/{demo_id}/pdf")
            assert page.status_code == 200
            assert link in page.text  # the good set is still there
            assert broken not in page.text and outside_id not in page.text
            for bad in (broken, outside_id):
                assert new_client.get(f"/projects/{demo_id}/pdf/jobs/{bad}/download").status_code == 404
            assert new_client.get(link).content == first
        finally:
            _close(new_app, new_client)
    logged = " ".join(r.getMessage() for r in caplog.records)
    assert broken in logged and outside_id in logged


def test_retention_keeps_the_newest_sets(db_url, demo_data, tmp_path):
    from tests.integration.web.conftest import sign_in

    new_app, new_client = _restarted(db_url, pdf_keep_sets=2)
    try:
        sign_in(new_client, new_app, "engineer")
        pid = new_app.state.services.import_file(demo_data).project_id
        links = [_run_job(new_client, pid, sheets)[0] for sheets in ("LP-1", "T-1", "LP-1")]
        sets = tmp_path / "pdf-cache" / "sets"
        assert len(list(sets.glob("*.json"))) == 2 and len(list(sets.glob("*.pdf"))) == 2
        page = new_client.get(f"/projects/{pid}/pdf").text
        assert links[0] not in page and links[1] in page and links[2] in page
        assert new_client.get(links[0]).status_code == 404
        assert new_client.get(links[2]).status_code == 200
        assert any(p.suffix == ".pdf" for p in (tmp_path / "pdf-cache").glob("??/*.pdf"))  # sheet cache untouched
    finally:
        _close(new_app, new_client)


def test_a_set_removed_while_its_download_starts_is_not_found(client, demo_id, monkeypatch):
    # Retention may delete a set between the existence check and the answer: a 404, never a 500.
    link, pdf = _run_job(client, demo_id, "LP-1")
    r = client.get(link)
    assert r.headers["content-disposition"].startswith("attachment;") and r.content == pdf
    assert r.headers["content-length"] == str(len(pdf))
    import server.web.routes.pdf as pdf_routes

    real_open = pdf_routes.Path.open

    def vanished(self, *args, **kwargs):
        if self.suffix == ".pdf":
            raise FileNotFoundError(str(self))
        return real_open(self, *args, **kwargs)

    monkeypatch.setattr(pdf_routes.Path, "open", vanished)
    r = client.get(link)
    assert r.status_code == 404 and "no longer on the server" in r.text
