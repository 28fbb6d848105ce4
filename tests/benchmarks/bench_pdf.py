"""PDF set benchmark on the generated project (tests/benchmarks/generate.py).

Run ``.venv/bin/python -m tests.benchmarks.bench_pdf [--panels N] [--workers W] [--sample K]``.
Prints, against floors measured in the same run (never absolute times as pass/fail):

1. Per sheet, single process: our whole path for one panel schedule (Jinja HTML, content hash,
   WeasyPrint with the shared stylesheet, and its share of the merge) ÷ the floor:
   WeasyPrint rendering a minimal page of the same paper size holding one plain, unstyled
   table with the same cell texts (target ≤ 1.3×).  Interleaved, best of 3 per sheet, over a
   deterministic sample of panel sheets, in CPU time of this process (``time.process_time``:
   other processes competing for the cores do not count; the wall-clock ratio is printed too).
   Our renderer pauses automatic garbage collection during a sheet and collects the young
   generation after it (server/pdf/render.py); the floor keeps WeasyPrint's default, so it
   also pays for the collections its allocations trigger.  For a like-for-like view of the
   rendering work alone, the floor is also timed under the same pause and printed beside it
   (information only: the target's floor is the default one).
2. Full set from a cold cache (parallel across every core) ÷ re-issuing revision 2 after one
   circuit edit (recompute, deltas, sheets, cache lookups, re-render of the changed sheets,
   merge) — target ≥ 20×.
"""

from __future__ import annotations

import argparse
import html as htmllib
import os
import random
import re
import tempfile
import time
from dataclasses import replace

from server.calc.engine import compute_project
from server.pdf.issue import history_for, make_set
from server.pdf.render import cache_key, collector_paused, html_to_pdf, merge_pdfs, sheet_html
from server.pdf.sheets import PAPERS, RevisionInfo, build_sheets
from tests.benchmarks.generate import generate_project

REV1 = RevisionInfo(1, "2026-12-01", "Issued for permit", "JK")
REV2 = RevisionInfo(2, "2026-12-08", "One circuit changed", "JK")
REPEATS = 5
COLUMNS = 13  # the panel schedule's circuit table is 13 columns wide


def floor_html(sheet_html_text: str, paper: str) -> str:
    """A minimal one-table page: the sheet's cell texts in one plain table, no stylesheet."""
    cells = re.findall(r"<t[dh][^>]*>(.*?)</t[dh]>", sheet_html_text, re.S)
    texts = [htmllib.escape(re.sub(r"<[^>]+>", " ", c).strip()) for c in cells]
    rows = [texts[i : i + COLUMNS] for i in range(0, len(texts), COLUMNS)]
    body = "".join("<tr>" + "".join(f"<td>{t}</td>" for t in row) + "</tr>" for row in rows)
    size = PAPERS[paper].css_size
    return f"<!doctype html><html><head><style>@page {{ size: {size}; }}</style></head><body><table>{body}</table></body></html>"


def _floor_render(text: str) -> bytes:
    from weasyprint import HTML

    return HTML(string=text).write_pdf()


def _floor_render_paused(text: str) -> bytes:
    with collector_paused():
        return _floor_render(text)


def per_sheet_ratio(project, result, sample: int) -> tuple[float, float, float, int, float, float]:
    specs = [s for s in build_sheets(project, result) if s.template == "pdf/panel.html"]
    rng = random.Random(7)
    chosen = rng.sample(specs, min(sample, len(specs)))
    paper = project.project.paper
    html_to_pdf(sheet_html(chosen[0], paper))  # warm up fonts and the stylesheet
    _floor_render(floor_html(sheet_html(chosen[0], paper), paper))
    ours_total = floor_total = ours_wall = floor_wall = paused_total = 0.0
    pdfs = []
    for spec in chosen:
        best_ours = best_floor = bw_ours = bw_floor = best_paused = float("inf")
        for _ in range(REPEATS):
            w0, t0 = time.perf_counter(), time.process_time()
            text = sheet_html(spec, paper)
            cache_key(text)
            pdf = html_to_pdf(text)
            best_ours = min(best_ours, time.process_time() - t0)
            bw_ours = min(bw_ours, time.perf_counter() - w0)
            floor = floor_html(text, paper)
            w0, t0 = time.perf_counter(), time.process_time()
            _floor_render(floor)
            best_floor = min(best_floor, time.process_time() - t0)
            bw_floor = min(bw_floor, time.perf_counter() - w0)
            t0 = time.process_time()
            _floor_render_paused(floor)
            best_paused = min(best_paused, time.process_time() - t0)
        pdfs.append(pdf)
        paused_total += best_paused
        ours_total += best_ours
        floor_total += best_floor
        ours_wall += bw_ours
        floor_wall += bw_floor
    t0 = time.process_time()
    merge_pdfs(pdfs, [s.number for s in chosen])
    merge_share = (time.process_time() - t0) / len(chosen)
    n = len(chosen)
    ours = ours_total / n + merge_share
    floor = floor_total / n
    paused = paused_total / n
    return ours, floor, ours / floor, n, (ours_wall / n + merge_share) / (floor_wall / n), paused


def edit_one_circuit(project):
    """A copy with one load circuit of the last panel 500 VA heavier."""
    panel = project.panels[-1]
    c = next(c for c in panel.circuits if c.va and not c.feeds)
    new_panel = replace(panel, circuits=tuple(replace(x, va=x.va + 500.0) if x is c else x for x in panel.circuits))
    return replace(project, panels=tuple(new_panel if p is panel else p for p in project.panels)), panel.tag, c.slot


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--panels", type=int, default=500)
    ap.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    ap.add_argument("--sample", type=int, default=8, help="panel sheets timed for the per-sheet ratio")
    args = ap.parse_args(argv)

    # The default tree has 8 services; smaller runs keep its proportions (at least one service).
    project = generate_project(panels=args.panels, sources=max(1, round(8 * args.panels / 500)))
    result = compute_project(project)
    print(
        f"project: {len(project.panels)} panels, {sum(len(p.circuits) for p in project.panels)} circuits; "
        f"{os.cpu_count()} cores, {args.workers} workers; load average {os.getloadavg()[0]:.1f}"
    )

    ours, floor, ratio, n, wall_ratio, paused = per_sheet_ratio(project, result, args.sample)
    print(
        f"[1] per panel sheet, single process, CPU time: ours {ours:.3f} s, floor (one plain table, same cells, "
        f"same paper) {floor:.3f} s -> ratio {ratio:.2f}x (target <= 1.3x; {n} sheets, best of {REPEATS}); "
        f"wall-clock ratio {wall_ratio:.2f}x"
    )
    print(
        f"    like for like, the floor also with the collector paused as ours is: floor {paused:.3f} s -> "
        f"ratio {ours / paused:.2f}x (information; the floor has no title block, headings or notes)"
    )

    with tempfile.TemporaryDirectory() as cache:
        t0 = time.perf_counter()
        result1 = compute_project(project)
        history1 = history_for(project, result1, current=REV1)
        pdf1, stats1 = make_set(project, result1, history1, cache_dir=cache, workers=args.workers)
        full = time.perf_counter() - t0
        print(
            f"[2] full set, cold cache: {stats1.sheets} sheets in {full:.1f} s "
            f"({full / stats1.sheets:.3f} s a sheet with {stats1.workers} workers; HTML {stats1.html_s:.1f} s, "
            f"render {stats1.render_s:.1f} s, merge {stats1.merge_s:.1f} s; {len(pdf1) / 1e6:.1f} MB)"
        )

        edited, tag, slot = edit_one_circuit(project)
        t0 = time.perf_counter()
        result2 = compute_project(edited)
        # The previous issue's results are the ones just rendered (the web app keeps them too).
        history2 = history_for(
            edited, result2, current=REV2, previous=project, previous_revision=REV1, previous_result=result1
        )
        pdf2, stats2 = make_set(edited, result2, history2, cache_dir=cache, workers=args.workers)
        reissue = time.perf_counter() - t0
        print(
            f"    re-issue as revision 2 after editing {tag} circuit {slot}: {reissue:.2f} s, "
            f"{stats2.rendered} of {stats2.sheets} sheets rendered (HTML {stats2.html_s:.2f} s, "
            f"render {stats2.render_s:.2f} s, merge {stats2.merge_s:.2f} s)"
        )
        print(f"    full ÷ re-issue = {full / reissue:.1f}x (target >= 20x)")


def test_pdf_benchmark_quick() -> None:
    """``pytest tests/benchmarks/bench_pdf.py -s``: a quick run (14 panels) that prints the figures."""
    main(["--panels", "14", "--sample", "2"])


if __name__ == "__main__":
    main()
