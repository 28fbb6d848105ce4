"""server.pdf.render: the collector pause around a render and the per-thread font configuration."""

from __future__ import annotations

import gc
import threading

from server.pdf import render

HTML = "<!doctype html><html><body><p>One line.</p></body></html>"


def test_a_render_restores_the_collector_and_frees_its_cycles():
    assert gc.isenabled()
    before = len(gc.garbage)
    pdf = render.html_to_pdf(HTML)
    assert pdf.startswith(b"%PDF-")
    assert gc.isenabled()
    assert render._gc_renders == 0
    assert len(gc.garbage) == before


def test_a_caller_that_disabled_the_collector_keeps_it_disabled():
    gc.disable()
    try:
        render.html_to_pdf(HTML)
        assert not gc.isenabled()
    finally:
        gc.enable()


def test_the_collector_stays_paused_until_the_last_concurrent_render_ends():
    inside = threading.Event()
    release = threading.Event()
    seen: list[bool] = []

    def long_render() -> None:
        with render.collector_paused():
            inside.set()
            release.wait(10)

    worker = threading.Thread(target=long_render)
    worker.start()
    assert inside.wait(10)
    render.html_to_pdf(HTML)  # starts and ends while the other render is still running
    seen.append(gc.isenabled())
    release.set()
    worker.join(10)
    assert seen == [False]
    assert gc.isenabled()


def test_font_configuration_is_kept_per_thread():
    mine = render._font_config()
    assert render._font_config() is mine
    other: list[object] = []
    t = threading.Thread(target=lambda: other.append(render._font_config()))
    t.start()
    t.join(10)
    assert other and other[0] is not mine


def test_merge_keeps_sheet_order_and_outlines_each_sheet():
    import io

    from pypdf import PdfReader

    sheets = [render.html_to_pdf(f"<!doctype html><html><body><p>Sheet {n}</p></body></html>") for n in (1, 2, 3)]
    merged = PdfReader(io.BytesIO(render.merge_pdfs(sheets, ["PW-001 A", "PW-002 B", "PW-003 C"])))
    assert [page.extract_text().strip() for page in merged.pages] == ["Sheet 1", "Sheet 2", "Sheet 3"]
    assert [(o.title, merged.get_destination_page_number(o)) for o in merged.outline] == [
        ("PW-001 A", 0),
        ("PW-002 B", 1),
        ("PW-003 C", 2),
    ]
