"""Rendering the set: Jinja (templates/pdf/) → HTML → WeasyPrint PDF per sheet → pikepdf merge.

* Every sheet is its own HTML document and its own PDF, so sheets render in parallel
  (``concurrent.futures.ProcessPoolExecutor``, one sheet per task) and are cached one by one.
* Cache key: sha256 of the template version (the renderer version, every file of
  ``templates/pdf/`` and the WeasyPrint version) and the sheet's rendered HTML.  Re-issuing after
  one edit re-renders only the sheets whose HTML changed (the edited panel, the panels and
  sheets whose printed values changed with it, and the index); the rest come from the cache.
* The shared stylesheet is parsed once per process and passed to WeasyPrint, not inlined; each
  thread keeps one font configuration across its renders (fonts found and measured once).
* The cyclic garbage collector is paused while a sheet renders and the young generation is
  collected right after: WeasyPrint allocates so many objects that automatic collections,
  full ones included, would otherwise run during every sheet and walk the whole process heap.
"""

from __future__ import annotations

import gc
import hashlib
import io
import multiprocessing
import os
import tempfile
import threading
import time
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from contextlib import contextmanager
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import TYPE_CHECKING

import jinja2

from server.formatting import register_filters

from .sheets import PAPERS, SheetSpec

if TYPE_CHECKING:
    from server.config import Settings

RENDERER_VERSION = "1"
ROOT = Path(__file__).resolve().parent.parent.parent
TEMPLATES_DIR = ROOT / "templates"
PDF_TEMPLATES = TEMPLATES_DIR / "pdf"
STYLESHEET = PDF_TEMPLATES / "sheet.css"
CACHE_ENV = "PANELWRIGHT_PDF_CACHE_DIR"  # Settings.pdf_cache_dir
DEFAULT_CACHE_DIR = Path("var") / "pdf-cache"

#: Below this many sheets to render, starting worker processes costs more than it saves.
POOL_THRESHOLD = 6

Progress = Callable[[int, int], None]  # (sheets done, sheets total)


@lru_cache(maxsize=1)
def template_version() -> str:
    """Hash of everything besides the HTML that shapes a sheet's PDF."""
    import weasyprint

    h = hashlib.sha256(f"panelwright-pdf {RENDERER_VERSION} weasyprint {weasyprint.__version__}\n".encode())
    for path in sorted(PDF_TEMPLATES.rglob("*")):
        if path.is_file():
            h.update(path.relative_to(PDF_TEMPLATES).as_posix().encode() + b"\0")
            h.update(path.read_bytes())
    return h.hexdigest()


@lru_cache(maxsize=1)
def environment() -> jinja2.Environment:
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(TEMPLATES_DIR)),
        autoescape=True,
        trim_blocks=True,
        lstrip_blocks=True,
        undefined=jinja2.StrictUndefined,
        auto_reload=False,
    )
    register_filters(env)
    return env


def sheet_html(spec: SheetSpec, paper_name: str) -> str:
    """The HTML of one sheet (formatting only: every number comes from the context)."""
    ctx = spec.context
    return (
        environment()
        .get_template(spec.template)
        .render(s=ctx, tb=ctx.title, paper=PAPERS[paper_name], rev=getattr(ctx, "delta_rev", None))
    )


def cache_key(html: str) -> str:
    return hashlib.sha256(template_version().encode() + b"\0" + html.encode("utf-8")).hexdigest()


class SheetCache:
    """Rendered sheet PDFs on disk, one file per content hash (written atomically).

    A hit refreshes the file's time; :meth:`prune` drops the least recently used files beyond
    ``max_files`` (a sheet is some 30–60 KB, so the default keeps the cache near 250 MB).
    """

    def __init__(self, directory: str | os.PathLike[str], *, max_files: int = 5000) -> None:
        self.directory = Path(directory)
        self.max_files = max_files

    def _path(self, key: str) -> Path:
        return self.directory / key[:2] / f"{key}.pdf"

    def get(self, key: str) -> bytes | None:
        path = self._path(key)
        try:
            data = path.read_bytes()
            os.utime(path)
            return data
        except OSError:
            return None

    def prune(self) -> int:
        """Remove the least recently used sheets beyond ``max_files``; returns how many went."""
        try:
            files = [p for p in self.directory.glob("??/*.pdf")]
        except OSError:
            return 0
        if len(files) <= self.max_files:
            return 0
        dated = []
        for p in files:
            try:
                dated.append((p.stat().st_mtime, p))
            except OSError:
                continue
        dated.sort()
        removed = 0
        for _, p in dated[: len(dated) - self.max_files]:
            p.unlink(missing_ok=True)
            removed += 1
        return removed

    def put(self, key: str, pdf: bytes) -> None:
        path = self._path(key)
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, suffix=".tmp")
        with os.fdopen(fd, "wb") as fh:
            fh.write(pdf)
        os.replace(tmp, path)


def default_cache_dir(*, cli: bool = False, settings: Settings | None = None) -> Path:
    """``Settings.pdf_cache_dir`` (PANELWRIGHT_PDF_CACHE_DIR), else ./var/pdf-cache (server) or a
    per-user temp dir (CLI).  Without ``settings``, fresh settings are read from the environment
    (pydantic's ``ValidationError`` if some PANELWRIGHT_ variable is malformed)."""
    from server.config import Settings

    value = (settings if settings is not None else Settings()).pdf_cache_dir
    if value:
        return Path(value)
    if cli:
        return Path(tempfile.gettempdir()) / f"panelwright-pdf-cache-{os.getuid() if hasattr(os, 'getuid') else 0}"
    return DEFAULT_CACHE_DIR


@lru_cache(maxsize=1)
def _stylesheet():  # type: ignore[no-untyped-def]
    from weasyprint import CSS

    return CSS(filename=str(STYLESHEET))


_fonts = threading.local()


def _font_config():  # type: ignore[no-untyped-def]
    """This thread's WeasyPrint font configuration, made once and reused by every render.

    A fresh one per render (WeasyPrint's default) loads the Fontconfig set again and starts an
    empty Pango font map and line-height cache.  Per thread because Pango font maps are not
    thread-safe; per process id because a forked worker must not share its parent's."""
    pid = os.getpid()
    if getattr(_fonts, "pid", None) != pid:
        from weasyprint.text.fonts import FontConfiguration

        _fonts.config, _fonts.pid = FontConfiguration(), pid
    return _fonts.config


_gc_lock = threading.Lock()
_gc_renders = 0  # renders in progress in this process
_gc_was_enabled = False


@contextmanager
def collector_paused() -> Iterator[None]:
    """Pause automatic garbage collection during a render; collect the young generation after.

    With collection paused, everything the render allocates stays in the young generation, so
    ``gc.collect(0)`` afterwards frees all of its reference cycles while walking only those
    objects (not the long-lived heap a full collection walks).  The collection is part of the
    render's own time.  Counted so that concurrent renders in threads re-enable it once, and
    left alone when the caller had already disabled it."""
    global _gc_renders, _gc_was_enabled
    with _gc_lock:
        if _gc_renders == 0:
            _gc_was_enabled = gc.isenabled()
            gc.disable()
        _gc_renders += 1
    try:
        yield
    finally:
        with _gc_lock:
            _gc_renders -= 1
            if _gc_renders == 0:
                gc.collect(0)
                if _gc_was_enabled:
                    gc.enable()


def html_to_pdf(html: str) -> bytes:
    """One sheet's HTML → PDF bytes (runs in a worker process or in-process)."""
    from weasyprint import HTML

    with collector_paused():
        return HTML(string=html, base_url=str(PDF_TEMPLATES)).write_pdf(
            stylesheets=[_stylesheet()], font_config=_font_config()
        )


def _warm() -> None:
    _stylesheet()
    _font_config()


def _mp_context() -> multiprocessing.context.BaseContext:
    """fork from a single-threaded process (the CLI: workers start at once, modules loaded);
    forkserver from a threaded one (the web server), where forking a thread holding a lock
    could hang the child.  The forkserver preloads this module so workers start warm."""
    if threading.active_count() == 1 and "fork" in multiprocessing.get_all_start_methods():
        return multiprocessing.get_context("fork")
    ctx = multiprocessing.get_context("forkserver")
    ctx.set_forkserver_preload(["server.pdf.render"])
    return ctx


@dataclass
class RenderStats:
    sheets: int = 0
    rendered: int = 0
    from_cache: int = 0
    workers: int = 1
    html_s: float = 0.0
    render_s: float = 0.0
    merge_s: float = 0.0


def render_pdfs(
    htmls: Sequence[str],
    *,
    cache: SheetCache | None,
    workers: int | None = None,
    progress: Progress | None = None,
    stats: RenderStats | None = None,
) -> list[bytes]:
    """PDF bytes of each HTML, from the cache or rendered (in parallel when worth it)."""
    stats = stats if stats is not None else RenderStats()
    t0 = time.perf_counter()
    total = len(htmls)
    out: list[bytes | None] = [None] * total
    keys = [cache_key(h) for h in htmls]
    todo: list[int] = []
    done = 0
    for i, key in enumerate(keys):
        hit = cache.get(key) if cache is not None else None
        if hit is not None:
            out[i] = hit
            done += 1
        else:
            todo.append(i)
    stats.sheets, stats.from_cache = total, done
    if progress:
        progress(done, total)
    n_workers = max(1, workers if workers is not None else (os.cpu_count() or 1))
    n_workers = min(n_workers, max(1, len(todo)))
    stats.workers = n_workers if len(todo) >= POOL_THRESHOLD else 1

    def finish(i: int, pdf: bytes) -> None:
        nonlocal done
        out[i] = pdf
        if cache is not None:
            cache.put(keys[i], pdf)
        done += 1
        if progress:
            progress(done, total)

    if stats.workers <= 1:
        for i in todo:
            finish(i, html_to_pdf(htmls[i]))
    else:
        try:
            with ProcessPoolExecutor(max_workers=n_workers, mp_context=_mp_context(), initializer=_warm) as pool:
                futures = {pool.submit(html_to_pdf, htmls[i]): i for i in todo}
                for fut in as_completed(futures):
                    finish(futures[fut], fut.result())
        except BrokenProcessPool:
            # A worker died (out of memory, killed): finish what is left here rather than fail the set.
            stats.workers = 1
            for i in todo:
                if out[i] is None:
                    finish(i, html_to_pdf(htmls[i]))
    stats.rendered = len(todo)
    if cache is not None and todo:
        cache.prune()
    stats.render_s = time.perf_counter() - t0
    return [b for b in out if b is not None]


def merge_pdfs(pdfs: Sequence[bytes], titles: Sequence[str]) -> bytes:
    """One PDF of every sheet in order, with an outline entry per sheet.

    pikepdf (qpdf, compiled) rather than a pure-Python merge: every sheet's objects are parsed
    and copied, and for a 500-panel set that took seconds, the larger part of a re-issue."""
    import pikepdf

    out = pikepdf.Pdf.new()
    # The sheets' streams are copied from their source documents when ``out`` is saved, so the
    # sources stay open until then.
    sources = []
    try:
        with out.open_outline() as outline:
            for pdf, title in zip(pdfs, titles, strict=True):
                src = pikepdf.Pdf.open(io.BytesIO(pdf))
                sources.append(src)
                start = len(out.pages)
                out.pages.extend(src.pages)
                outline.root.append(pikepdf.OutlineItem(title, start))
        buf = io.BytesIO()
        out.save(buf)
        return buf.getvalue()
    finally:
        for src in sources:
            src.close()
        out.close()
