"""The PDF set is reachable from every project page (navigation link) and a panel page has its
own PDF button; pressing it (a plain form post with the form's CSRF token, or htmx) starts a job
that renders that panel's schedule."""

from __future__ import annotations

from tests.integration.pdfjobs import follow_job, private_pdf_cache  # noqa: F401 - autouse fixture
from tests.integration.web.html import parse
from tests.unit.pdf.pdftext import panel_pages, read_pages


def test_every_project_page_links_the_pdf_set(client, demo_id):
    for url in (f"/projects/{demo_id}", f"/projects/{demo_id}/panels/LP-1", f"/projects/{demo_id}/growth"):
        r = client.get(url)
        assert r.status_code == 200, url
        link = parse(r.text).by_id("nav-pdf")
        assert link is not None, f"{url}: no PDF set link in the project navigation"
        assert link.attrs["href"] == f"/projects/{demo_id}/pdf" and link.text == "PDF set"
        assert "aria-current" not in link.attrs
    page = client.get(f"/projects/{demo_id}/pdf")
    assert parse(page.text).by_id("nav-pdf").attrs.get("aria-current") == "page"


def test_the_panel_page_button_starts_a_job_for_that_panel(client, demo_id):
    r = client.get(f"/projects/{demo_id}/panels/LP-1")
    doc = parse(r.text)
    box = doc.by_id("panel-pdf")
    assert box is not None
    form = box.find("form", class_="pdf-button")
    assert form is not None and form.attrs["action"] == f"/projects/{demo_id}/pdf"
    assert form.attrs["hx-post"] == f"/projects/{demo_id}/pdf"
    fields = {i.attrs["name"]: i.attrs.get("value", "") for i in form.find_all("input")}
    assert fields["sheets"] == "LP-1"
    meta = doc.find("meta", name="csrf-token").attrs["content"]
    assert fields["csrf_token"] and fields["csrf_token"] == meta, "the form carries the page's CSRF token"
    assert "PDF of LP-1" in form.find("button").text
    assert box.find("div", class_="pdf-job") is not None, "the progress fragment has a place to go"

    # A plain form post (no htmx, no CSRF header: the form's own token) redirects to the job page.
    header = client.headers.pop("X-CSRF-Token")
    try:
        started = client.post(f"/projects/{demo_id}/pdf", data=fields, follow_redirects=False)
    finally:
        client.headers["X-CSRF-Token"] = header
    assert started.status_code == 303, started.text
    final = follow_job(client, started.headers["location"])
    assert 'data-state="done"' in final, final
    link = final.split('class="pdf-download"')[0].rsplit('href="', 1)[1].split('"')[0]
    pdf = client.get(link)
    assert pdf.status_code == 200 and pdf.headers["content-type"] == "application/pdf"
    assert list(panel_pages(read_pages(pdf.content))) == ["LP-1"]


def test_the_button_without_a_token_is_refused(client, demo_id):
    header = client.headers.pop("X-CSRF-Token")
    try:
        r = client.post(f"/projects/{demo_id}/pdf", data={"sheets": "LP-1"}, follow_redirects=False)
    finally:
        client.headers["X-CSRF-Token"] = header
    assert r.status_code == 403
