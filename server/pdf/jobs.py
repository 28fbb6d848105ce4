"""Background PDF jobs of the web app: one worker thread renders sets one after another.

A job renders the set (or some sheets) of a stored project with :func:`server.pdf.issue.make_set`
(which itself spreads the sheets over worker processes) and reports progress as sheets
done / total; the page polls a status fragment and offers the download at the end.

A finished set is kept on disk in the sets folder (``<pdf cache>/sets``): ``<job id>.pdf``
and its record ``<job id>.json`` (:mod:`server.pdf.records`).  The registry reads the
records when it is made, so finished sets and their downloads survive a restart.  Jobs
that were queued or running when the server stopped leave no record and are not resumed.
Each project keeps its newest ``keep`` finished sets (``PANELWRIGHT_PDF_KEEP_SETS``); older
ones lose their PDF and record when a newer set finishes.  Nothing else lives in the sets
folder: issued revisions keep their frozen project file in the database, not a PDF here.
"""

from __future__ import annotations

import io
import logging
import threading
import uuid
from collections import OrderedDict
from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from .issue import make_set
from .records import RecordError, SetRecord, is_job_id, pdf_path, read_record, record_path, sha256_hex, write_atomic
from .records import write_record as _write_record
from .stored import stored_set

log = logging.getLogger("panelwright.pdf")
#: Failed jobs kept in memory (for their message) at most; they have nothing on disk.
KEEP_FAILED = 50


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="microseconds").replace("+00:00", "Z")


@dataclass
class Job:
    id: str
    project_id: int
    sheets: tuple[str, ...] | None
    filename: str
    state: str = "queued"  # queued | running | done | failed
    done: int = 0
    total: int = 0
    rendered: int = 0
    from_cache: int = 0
    message: str = ""
    path: Path | None = None
    project_number: str = ""
    revision: str = ""
    started_by: str = ""
    started_at: str = ""
    finished_at: str = ""
    pages: int = 0
    size_bytes: int = 0
    sha256: str = ""
    lock: threading.Lock = field(default_factory=threading.Lock, repr=False)

    @property
    def percent(self) -> int:
        if self.state == "done":
            return 100
        return int(100 * self.done / self.total) if self.total else 0

    @property
    def finished(self) -> bool:
        return self.state in ("done", "failed")

    @property
    def sheets_label(self) -> str:
        return ", ".join(self.sheets) if self.sheets else "whole set"

    def record(self) -> SetRecord:
        return SetRecord(
            job_id=self.id,
            project_id=self.project_id,
            project_number=self.project_number,
            sheets=self.sheets,
            revision=self.revision,
            started_by=self.started_by,
            started_at=self.started_at,
            finished_at=self.finished_at,
            pages=self.pages,
            sheet_count=self.total,
            rendered=self.rendered,
            from_cache=self.from_cache,
            file=f"{self.id}.pdf",
            download_name=self.filename,
            size_bytes=self.size_bytes,
            sha256=self.sha256,
        )

    @classmethod
    def from_record(cls, rec: SetRecord, directory: Path) -> Job:
        return cls(
            rec.job_id,
            rec.project_id,
            rec.sheets,
            rec.download_name,
            state="done",
            done=rec.sheet_count,
            total=rec.sheet_count,
            rendered=rec.rendered,
            from_cache=rec.from_cache,
            path=directory / rec.file,
            project_number=rec.project_number,
            revision=rec.revision,
            started_by=rec.started_by,
            started_at=rec.started_at,
            finished_at=rec.finished_at,
            pages=rec.pages,
            size_bytes=rec.size_bytes,
            sha256=rec.sha256,
        )


def _page_count(pdf: bytes) -> int:
    from pypdf import PdfReader

    return len(PdfReader(io.BytesIO(pdf)).pages)


class JobRegistry:
    """Jobs by id; a single background thread (sets queue rather than compete for the cores).

    ``keep``: finished sets kept per project.  The finished sets of earlier runs are read
    from ``output_dir`` when the registry is made (unusable records are skipped and logged).
    """

    def __init__(self, output_dir: str | Path, cache_dir: str | Path, *, keep: int = 20) -> None:
        self.output_dir = Path(output_dir)
        self.cache_dir = Path(cache_dir)
        self.keep = keep
        self._jobs: OrderedDict[str, Job] = OrderedDict()
        self._guard = threading.Lock()
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="panelwright-pdf")
        self._load()

    def _load(self) -> None:
        """Read the records of finished sets, oldest first; skip (and log) the unusable ones."""
        try:
            paths = sorted(self.output_dir.glob("*.json"))
        except OSError as exc:
            log.warning("PDF sets folder %s cannot be listed: %s", self.output_dir, exc)
            return
        jobs: list[Job] = []
        for path in paths:
            if not is_job_id(path.stem):  # a temporary file of an interrupted write, or not ours
                log.info("ignored %s in the PDF sets folder (not a set record)", path)
                continue
            try:
                jobs.append(Job.from_record(read_record(path, self.output_dir), self.output_dir))
            except RecordError as exc:
                log.warning("skipped PDF set record %s: %s", path, exc)
        jobs.sort(key=lambda j: (j.finished_at, j.id))
        with self._guard:
            for job in jobs:
                self._jobs[job.id] = job
        for project_id in {j.project_id for j in jobs}:
            self._retain(project_id)

    def get(self, job_id: str) -> Job | None:
        if not is_job_id(job_id):
            return None
        with self._guard:
            return self._jobs.get(job_id)

    def finished_sets(self, project_id: int) -> list[Job]:
        """The project's finished sets, newest first."""
        with self._guard:
            done = [j for j in self._jobs.values() if j.project_id == project_id and j.state == "done"]
        return sorted(done, key=lambda j: (j.finished_at, j.id), reverse=True)

    def submit(
        self,
        services: Any,
        project_id: int,
        sheets: Sequence[str] | None,
        filename: str,
        *,
        project_number: str = "",
        started_by: str = "",
    ) -> Job:
        job = Job(
            uuid.uuid4().hex,
            project_id,
            tuple(sheets) if sheets else None,
            filename,
            project_number=project_number,
            started_by=started_by,
            started_at=_now(),
        )
        with self._guard:
            self._jobs[job.id] = job
            failed = [j.id for j in self._jobs.values() if j.state == "failed"]
            for old in failed[: max(0, len(failed) - KEEP_FAILED)]:
                del self._jobs[old]
        self._pool.submit(self._run, services, job)
        return job

    def _run(self, services: Any, job: Job) -> None:
        def progress(done: int, total: int) -> None:
            with job.lock:
                job.done, job.total = done, total

        job.state = "running"
        try:
            stored = stored_set(services, job.project_id)
            current = stored.history.current
            job.revision = f"revision {current.number}" if current is not None else "draft"
            pdf, stats = make_set(
                stored.model,
                stored.result,
                stored.history,
                select=job.sheets,
                cache_dir=self.cache_dir,
                progress=progress,
                growth=stored.growth,
            )
            path = pdf_path(self.output_dir, job.id)
            write_atomic(path, pdf)
            with job.lock:
                job.path, job.rendered, job.from_cache = path, stats.rendered, stats.from_cache
                job.pages, job.size_bytes, job.sha256 = _page_count(pdf), len(pdf), sha256_hex(pdf)
                job.finished_at = _now()
            _write_record(self.output_dir, job.record())  # the record marks the set complete
            job.state = "done"
        except KeyError as exc:
            job.message, job.state = f"no sheet named {exc.args[0]}", "failed"
        except Exception as exc:  # reported on the page; the server log has the traceback
            log.exception("PDF job %s failed", job.id)
            job.message, job.state = f"the set could not be rendered ({type(exc).__name__})", "failed"
        if job.state == "failed":  # no record: a PDF written before the failure would never be listed
            pdf_path(self.output_dir, job.id).unlink(missing_ok=True)
        if job.state == "done":
            self._retain(job.project_id)

    def _retain(self, project_id: int) -> None:
        """Delete the project's finished sets beyond the newest ``keep`` (record first, then PDF)."""
        old = self.finished_sets(project_id)[self.keep :]
        with self._guard:
            for job in old:
                self._jobs.pop(job.id, None)
        for job in old:
            try:
                record_path(self.output_dir, job.id).unlink(missing_ok=True)
                pdf_path(self.output_dir, job.id).unlink(missing_ok=True)
            except OSError as exc:
                log.warning("could not delete the old PDF set %s: %s", job.id, exc)

    def shutdown(self) -> None:
        self._pool.shutdown(wait=False, cancel_futures=True)
