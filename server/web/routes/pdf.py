"""PDF set buttons: start a background render, poll its progress (htmx, every 500 ms), download.

``POST /projects/{pid}/pdf`` (optional ``sheets``: a panel tag for the panel's own sheet)
queues a job and answers with the progress fragment (htmx) or redirects to the job page.
``GET …/pdf/jobs/{id}`` is the page, or with htmx the fragment; ``…/download`` sends the PDF.
Finished sets are listed on the PDF page; their records on disk bring them back after a restart
(:mod:`server.pdf.jobs`).  A job id in a URL must be one the registry knows (32 hex digits, its
PDF inside the sets folder); anything else is a 404.
The set itself comes from :mod:`server.pdf` (the same result objects as every screen).
"""

from __future__ import annotations

import os
import re
import threading
from dataclasses import dataclass
from pathlib import Path
from urllib.parse import quote

from fastapi import APIRouter, Depends, Form, Request
from fastapi.responses import RedirectResponse, Response, StreamingResponse

from server.auth.permissions import Require
from server.auth.roles import Permission
from server.pdf.jobs import Job, JobRegistry
from server.pdf.render import default_cache_dir
from server.services import NotFound
from server.web.deps import HtmxDep, ServicesDep, TemplatesDep
from server.web.views import Page, page

router = APIRouter(tags=["pdf"])
#: Making a PDF changes nothing stored: reading the project is enough, so reviewers may print too.
READ = [Depends(Require(Permission.READ))]
BASE = "/projects/{pid}/pdf"
_registry_lock = threading.Lock()


@dataclass(frozen=True)
class PdfJobContext:
    """A PDF job: its progress, the download link when done, the message when it failed."""

    page: Page
    job: Job
    status_url: str
    download_url: str


def registry(request: Request) -> JobRegistry:
    """The app's job registry, made on first use (cache: the app's ``pdf_cache_dir`` setting or ./var/pdf-cache)."""
    reg = getattr(request.app.state, "pdf_jobs", None)
    if reg is not None:
        return reg
    with _registry_lock:  # one registry per app, even when the first requests arrive together
        reg = getattr(request.app.state, "pdf_jobs", None)
        if reg is None:
            settings = getattr(request.app.state, "settings", None)
            cache = default_cache_dir(settings=settings)
            keep = settings.pdf_keep_sets if settings is not None else 20
            reg = JobRegistry(cache / "sets", cache, keep=keep)
            request.app.state.pdf_jobs = reg
    return reg


def _job(request: Request, pid: int, job_id: str) -> Job:
    job = registry(request).get(job_id)
    if job is None or job.project_id != pid:
        shown = job_id if re.fullmatch(r"[0-9a-f]{32}", job_id) else "with that id"
        raise NotFound(f"no PDF job {shown} for project {pid}")
    return job


def _context(request: Request, snap, job: Job) -> PdfJobContext:
    base = f"/projects/{snap.project_id}/pdf/jobs/{job.id}"
    return PdfJobContext(page(snap, "PDF set", "pdf"), job, base, base + "/download")


@dataclass(frozen=True)
class PdfPageContext:
    """The PDF page: a button for the whole set and one per panel."""

    page: Page
    panels: list[str]
    revision: str  # what the set prints: "revision N" or "draft (not issued)"
    finished: list[Job]  # the project's finished sets, newest first
    keep: int  # how many finished sets a project keeps


@router.get(BASE, name="pdf_page", dependencies=READ)
def pdf_page(request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep) -> Response:
    snap = svc.snapshot(pid)
    from server.pdf.stored import stored_set

    history = stored_set(svc, pid).history
    revision = f"revision {history.current.number}" if history.current else "a draft (changed since the last issue)"
    reg = registry(request)
    ctx = PdfPageContext(
        page(snap, "PDF set", "pdf"), [p.tag for p in snap.model.panels], revision, reg.finished_sets(pid), reg.keep
    )
    return templates.TemplateResponse(request, "pdfjobs/index.html", {"ctx": ctx, "page": ctx.page})


@router.post(BASE, name="pdf_start", dependencies=READ)
def start(
    request: Request, pid: int, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep, sheets: str = Form("")
) -> Response:
    snap = svc.snapshot(pid)
    names = [s.strip() for s in sheets.split(",") if s.strip()] or None
    known = (
        {p.tag for p in snap.model.panels}
        | {t.tag for t in snap.model.transformers}
        | {s.tag for s in snap.model.sources}
    )
    for n in names or []:
        if n not in known and not re.fullmatch(r"PW-\d{3}(\.\d+)?|index|cover|warnings|transformers|growth", n):
            raise NotFound(f"no sheet named {n} in project {snap.info.number or pid}")
    stem = re.sub(
        r"[^A-Za-z0-9._-]+", "-", f"{snap.info.number or pid}-{names[0] if names and len(names) == 1 else 'set'}"
    )
    user = getattr(request.state, "user", None)
    job = registry(request).submit(
        svc,
        pid,
        names,
        f"{stem}.pdf",
        project_number=snap.info.number or "",
        started_by=getattr(user, "name", "") or "",
    )
    if not htmx:
        return RedirectResponse(f"/projects/{pid}/pdf/jobs/{job.id}", status_code=303)
    ctx = _context(request, snap, job)
    return templates.TemplateResponse(request, "pdfjobs/_job.html", {"ctx": ctx, "page": ctx.page})


@router.get(BASE + "/jobs/{job_id}", name="pdf_job", dependencies=READ)
def status(
    request: Request, pid: int, job_id: str, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep
) -> Response:
    snap = svc.snapshot(pid)
    ctx = _context(request, snap, _job(request, pid, job_id))
    name = "pdfjobs/_job.html" if htmx else "pdfjobs/job.html"
    return templates.TemplateResponse(request, name, {"ctx": ctx, "page": ctx.page})


@router.get(BASE + "/jobs/{job_id}/download", name="pdf_download", dependencies=READ)
def download(request: Request, pid: int, job_id: str) -> Response:
    reg = registry(request)
    job = _job(request, pid, job_id)
    if job.state != "done" or job.path is None:
        raise NotFound(f"the PDF of job {job_id} is not ready")
    path = Path(job.path).resolve()
    if path.parent != reg.output_dir.resolve() or path.name != f"{job.id}.pdf" or not os.path.isfile(path):
        raise NotFound(f"the PDF of job {job_id} is no longer on the server")
    try:
        # Opened before the answer starts: retention may delete the file meanwhile, and an open
        # file stays readable after its name is removed (a plain path would fail mid-answer).
        handle = path.open("rb")
    except FileNotFoundError:
        raise NotFound(f"the PDF of job {job_id} is no longer on the server") from None
    size = os.fstat(handle.fileno()).st_size
    return StreamingResponse(
        _chunks(handle),
        media_type="application/pdf",
        headers={"Content-Disposition": _attachment(job.filename), "Content-Length": str(size)},
    )


def _chunks(handle, size: int = 1 << 16):
    with handle:
        while chunk := handle.read(size):
            yield chunk


def _attachment(filename: str) -> str:
    """Content-Disposition for a download, with the RFC 6266/5987 form for non-ASCII names."""
    quoted = quote(filename)
    if quoted == filename:
        return f'attachment; filename="{filename}"'
    return f"attachment; filename*=utf-8''{quoted}"
