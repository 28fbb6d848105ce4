"""The demo project's submittal set, read back from the PDF text.

Every panel has its schedule; the per-phase totals, demand, feeder, fault current and the
rated short-circuit comparison printed equal the engine's results formatted with the same
filters the templates use; every page carries the title block, the seal box and the
cautions; nothing runs off the page or into the title-block strip.  Every page is also
rendered to PNG under test-artifacts/pdf/ for a reviewer.
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

from server import formatting as fmt
from server.calc.projectfile import load_project_file
from server.pdf.issue import compute, history_for, make_set
from server.pdf.sheets import PAPERS, RevisionInfo
from tests.helpers import DEMO_FILE
from tests.unit.pdf.pdftext import content_box_pt, panel_pages, read_pages

REV1 = RevisionInfo(1, "2026-11-30", "Issued for permit", "JK")


@pytest.fixture(scope="module")
def demo():
    project = load_project_file(DEMO_FILE)
    return project, compute(project)


@pytest.fixture(scope="module")
def demo_set(demo, tmp_path_factory):
    project, result = demo
    cache = tmp_path_factory.mktemp("pdf-cache")
    history = history_for(project, result, current=REV1)
    pdf, stats = make_set(project, result, history, cache_dir=cache)
    return pdf, stats, read_pages(pdf)


def _num(text: str) -> str:
    return re.escape(text)


def test_the_set_is_a_pdf_with_every_panel(demo, demo_set):
    project, _ = demo
    pdf, stats, pages = demo_set
    assert pdf.startswith(b"%PDF")
    assert stats.rendered == stats.sheets and stats.from_cache == 0
    found = panel_pages(pages)
    assert sorted(found) == sorted(p.tag for p in project.panels)
    for tag, ps in found.items():
        assert len(ps) == 1, f"{tag}: a 42-space schedule fits one tabloid sheet"


def test_panel_figures_equal_the_engine(demo, demo_set):
    project, result = demo
    _, _, pages = demo_set
    found = panel_pages(pages)
    for panel in project.panels:
        r = result.panels[panel.tag]
        page = found[panel.tag][0]
        lines = page.body.splitlines()
        text = page.flat
        # Per-phase totals: "A 21,830 180.8" opens a line of the phase-totals table.
        for ph, va in r.connected_va.items():
            want = f"{ph} {fmt.va(va)} {fmt.amps(r.line_amps[ph])}"
            assert any(line.startswith(want) for line in lines), f"{panel.tag}: phase row {want!r} not printed"
        assert f"Neutral current {fmt.amps(r.neutral_amps)} A" in text
        assert f"Phase imbalance {fmt.pct(r.imbalance_pct)}" in text
        assert f"Design current {fmt.amps(r.design_amps)} A" in text
        # Demand: the category table's total row carries connected and demand VA.
        assert re.search(rf"Total {_num(fmt.va(r.connected_va_total))} {_num(fmt.va(r.demand_va))}\b", text), panel.tag
        for step in r.demand_steps:
            assert f"{fmt.va(step.connected_va)} {fmt.factor(step.factor)} {fmt.va(step.demand_va)}" in text, (
                f"{panel.tag}: demand step {step.category}"
            )
            assert step.rule in text
        # Feeder.
        f = r.feeder
        if f is not None:
            sets = f"{f.sets} sets × " if f.sets > 1 else ""
            assert f"Phase conductors {sets}{f.conductor} {f.material}" in text, panel.tag
            assert f"Feeder OCPD {fmt.rating(f.ocpd_amps)}" in text
            assert f"{f.egc} EGC" in text
            assert f"Voltage drop, feeder {fmt.pct(f.voltage_drop_pct, 2)}" in text
            assert f"Voltage drop, cumulative {fmt.pct(f.cumulative_voltage_drop_pct, 2)}" in text
        # Fault current against the panel's rating.
        assert f"Available fault current {fmt.ka(r.fault_ka)}" in text, panel.tag
        if panel.sccr_ka is not None and r.fault_ka is not None:
            verdict = "rating ≥ available" if panel.sccr_ka >= r.fault_ka else "BELOW available fault current"
            assert f"Rated short-circuit current {fmt.ka(panel.sccr_ka)} — {verdict}" in text
        # Panel data block.
        assert panel.system in text and fmt.rating(panel.bus_amps) in text
        assert f"{r.spaces_used} of {r.spaces_total}" in text


def test_panel_rows_are_in_panelboard_order(demo, demo_set):
    """Odd circuits left, even right, and the bus phase of each row (A, B, C repeating)."""
    project, _ = demo
    _, _, pages = demo_set
    page = panel_pages(pages)["LP-1"][0]
    rows = [line for line in page.body.splitlines() if re.match(r"^\d+ .* [ABC] .* \d+$", line)]
    first = [int(line.split()[0]) for line in rows]
    assert first == list(range(1, 42, 2))
    for line in rows:
        left, right = int(line.split()[0]), int(line.split()[-1])
        assert right == left + 1
        phase = "ABC"[((left + 1) // 2 - 1) % 3]
        assert f" {phase} " in line


def test_transformer_and_load_calculation_sheets(demo, demo_set):
    project, result = demo
    _, _, pages = demo_set
    tx = [p for p in pages if "TRANSFORMER SCHEDULE" in p.text]
    assert len(tx) == 1
    body = re.sub(r"\s+", " ", tx[0].body)
    tags = [t.tag for t in project.transformers]
    for k, t in enumerate(project.transformers):
        r = result.transformers[t.tag]
        start = body.index(f" {t.tag} ") if f" {t.tag} " in body else body.index(t.tag)
        end = body.index(f" {tags[k + 1]} ", start) if k + 1 < len(tags) else len(body)
        row = body[start:end]
        for value in (
            fmt.kva(t.kva),
            fmt.kva(r.load_kva),
            fmt.amps(r.fla_primary),
            fmt.amps(r.fla_secondary),
            fmt.ka(r.secondary_fault_ka),
        ):
            assert value in row, f"{t.tag}: {value!r} not in {row!r}"
    for s in project.sources:
        sr = result.sources[s.tag]
        page = next(p for p in pages if f"LOAD CALCULATION — SERVICE {s.tag}" in p.text)
        assert f"NFPA 70 (NEC) {project.project.code.year} edition" in page.text
        for step in sr.demand_steps:
            assert step.rule in page.flat
            assert f"{fmt.va(step.connected_va)} {fmt.factor(step.factor)} {fmt.va(step.demand_va)}" in page.flat
        assert f"Design current {fmt.amps(sr.design_amps)} A" in page.flat


def test_warnings_sheet_lists_every_remaining_warning(demo, demo_set):
    from server.pdf.sheets import all_warnings

    _, result = demo
    _, _, pages = demo_set
    warnings = all_warnings(result)
    wpages = [p for p in pages if "CALCULATION WARNINGS" in p.text]
    assert bool(wpages) == bool(warnings)
    text = " ".join(p.flat for p in wpages)
    for w in warnings:
        assert w.code.value in text
        assert w.message[:40] in text


def test_every_page_has_title_block_seal_and_cautions(demo, demo_set):
    project, _ = demo
    _, _, pages = demo_set
    info = project.project
    for p in pages:
        words = [w["text"] for w in p.words]
        assert words.count("SEAL") == 1, f"page {p.index}: one seal box"
        flat = p.flat
        for needed in (
            info.name,
            info.number,
            info.firm,
            "engineer of record",
            "local amendments govern",
            f"{info.code}",
            "NFPA 70 (NEC), 2023 edition",
            "Drawn".upper(),
            "CHECKED",
            info.drawn_by,
            "Signature and date",
        ):
            assert needed in flat, f"page {p.index}: {needed!r} missing"
        assert re.search(r"PW-\d{3}", flat)
        assert "REVISION 1" in flat or re.search(r"\b1 2026-11-30\b", flat)


def test_seal_box_is_about_two_and_a_half_inches(demo_set):
    """The seal box is 2.5 in square (common practice for a professional seal and signature)."""
    pdf, _, _ = demo_set
    import io

    import pdfplumber

    with pdfplumber.open(io.BytesIO(pdf)) as doc:
        for page in doc.pages:
            squares = [r for r in page.rects if abs(r["width"] - 180) < 2 and abs(r["height"] - 180) < 2]
            assert len(squares) == 1, f"page {page.page_number}: one 2.5 in (180 pt) square"


def test_nothing_runs_off_the_page_or_into_the_title_block(demo, demo_set):
    project, _ = demo
    _, _, pages = demo_set
    x0, top, x1, bottom = content_box_pt(project.project.paper)
    for p in pages:
        for c in p.chars:
            assert 0 <= c["x0"] and c["x1"] <= p.width and 0 <= c["top"] and c["bottom"] <= p.height, (
                f"page {p.index}: {c['text']!r} off the page"
            )
        for w in p.words:
            if w["x0"] < x1 - 1:  # starts in the sheet body: must end there too
                assert w["x1"] <= x1 + 1, f"page {p.index}: {w['text']!r} runs into the title block"
                assert w["bottom"] <= bottom + 1, f"page {p.index}: {w['text']!r} runs below the body"


@pytest.mark.parametrize("paper", ["letter-portrait", "letter-landscape", "tabloid-portrait"])
def test_other_papers_fit(demo, paper, tmp_path):
    from dataclasses import replace

    project, result = demo
    project = replace(project, project=replace(project.project, paper=paper))
    pdf, _ = make_set(project, result, select=["LP-1", "T-1", "UTIL"], cache_dir=tmp_path)
    pages = read_pages(pdf, paper)
    pp = PAPERS[paper]
    x0, top, x1, bottom = content_box_pt(paper)
    assert pages and all(abs(p.width - pp.width_in * 72) < 1 and abs(p.height - pp.height_in * 72) < 1 for p in pages)
    for p in pages:
        assert [w["text"] for w in p.words].count("SEAL") == 1
        assert "local amendments govern" in p.flat
        for w in p.words:
            assert 0 <= w["x0"] and w["x1"] <= p.width and w["bottom"] <= p.height
            if w["x0"] < x1 - 1 and w["top"] < bottom - 1:
                assert w["x1"] <= x1 + 1 and w["bottom"] <= bottom + 1, (
                    f"{paper} page {p.index}: {w['text']!r} leaves the sheet body"
                )


def test_pngs_for_review(demo_set, artifacts_dir: Path, tmp_path):
    """Every page of the demo set as PNG in test-artifacts/pdf/ (poppler's pdftoppm)."""
    if shutil.which("pdftoppm") is None:
        pytest.fail("pdftoppm (poppler-utils) is required to render the review PNGs")
    pdf, _, pages = demo_set
    out = artifacts_dir / "pdf"
    if out.exists():
        shutil.rmtree(out)
    out.mkdir(parents=True)
    src = tmp_path / "demo-set.pdf"
    src.write_bytes(pdf)
    shutil.copy(src, out / "demo-set.pdf")
    subprocess.run(["pdftoppm", "-r", "80", "-png", str(src), str(out / "page")], check=True, timeout=300)
    pngs = sorted(out.glob("page-*.png"))
    assert len(pngs) == len(pages)
    assert all(p.stat().st_size > 10_000 for p in pngs)
