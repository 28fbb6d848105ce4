"""Background PDF jobs of the web app: one worker thread renders sets one after another.

A job renders the set (or some sheets) of a stored project with :func:`server.pdf.issue.make_set`
(which itself spreads the sheets over worker processes) and reports progress as sheets
done / total; the page polls a status fragment and offers the download at the end.  Jobs
and their PDFs live in memory and in the cache directory; the newest ``keep`` are kept.
"""

from __future__ import annotations

import threading
import uuid
from collections import OrderedDict
from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .issue import make_set
from .stored import stored_set


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
    lock: threading.Lock = field(default_factory=threading.Lock, repr=False)

    @property
    def percent(self) -> int:
        if self.state == "done":
            return 100
        return int(100 * self.done / self.total) if self.total else 0

    @property
    def finished(self) -> bool:
        return self.state in ("done", "failed")


class JobRegistry:
    """Jobs by id; a single background thread (sets queue rather than compete for the cores)."""

    def __init__(self, output_dir: str | Path, cache_dir: str | Path, *, keep: int = 20) -> None:
        self.output_dir = Path(output_dir)
        self.cache_dir = Path(cache_dir)
        self.keep = keep
        self._jobs: OrderedDict[str, Job] = OrderedDict()
        self._guard = threading.Lock()
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="panelwright-pdf")

    def get(self, job_id: str) -> Job | None:
        with self._guard:
            return self._jobs.get(job_id)

    def submit(self, services: Any, project_id: int, sheets: Sequence[str] | None, filename: str) -> Job:
        job = Job(uuid.uuid4().hex, project_id, tuple(sheets) if sheets else None, filename)
        with self._guard:
            self._jobs[job.id] = job
            while len(self._jobs) > self.keep:
                _, old = self._jobs.popitem(last=False)
                if old.path is not None:
                    old.path.unlink(missing_ok=True)
        self._pool.submit(self._run, services, job)
        return job

    def _run(self, services: Any, job: Job) -> None:
        def progress(done: int, total: int) -> None:
            with job.lock:
                job.done, job.total = done, total

        job.state = "running"
        try:
            stored = stored_set(services, job.project_id)
            pdf, stats = make_set(
                stored.model,
                stored.result,
                stored.history,
                select=job.sheets,
                cache_dir=self.cache_dir,
                progress=progress,
                growth=stored.growth,
            )
            self.output_dir.mkdir(parents=True, exist_ok=True)
            path = self.output_dir / f"{job.id}.pdf"
            path.write_bytes(pdf)
            with job.lock:
                job.path, job.rendered, job.from_cache = path, stats.rendered, stats.from_cache
                job.state = "done"
        except KeyError as exc:
            job.message, job.state = f"no sheet named {exc.args[0]}", "failed"
        except Exception as exc:  # reported on the page; the server log has the traceback
            import logging

            logging.getLogger("panelwright.pdf").exception("PDF job %s failed", job.id)
            job.message, job.state = f"the set could not be rendered ({type(exc).__name__})", "failed"

    def shutdown(self) -> None:
        self._pool.shutdown(wait=False, cancel_futures=True)
