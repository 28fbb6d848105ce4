"""Helpers for tests that read the text of a generated PDF set (pdfplumber)."""

from __future__ import annotations

import io
import re
from dataclasses import dataclass

import pdfplumber

from server.pdf.sheets import PAPERS

MARKER = "△"
#: Word gap for text extraction: the sheets use a narrow face at 6–8 pt, whose word spaces are
#: narrower than pdfplumber's default 3 pt tolerance.
X_TOLERANCE = 1.2


@dataclass
class PageText:
    index: int
    width: float
    height: float
    text: str
    words: list[dict]
    chars: list[dict]
    body: str  # text of the sheet body only (inside the margins, without the title block)
    strip: str  # text of the title-block strip (right edge landscape, bottom edge portrait)

    @property
    def flat(self) -> str:
        """The page text with every run of whitespace made one space (lines joined)."""
        return re.sub(r"\s+", " ", self.text)


def read_pages(pdf: bytes, paper: str = "tabloid-landscape") -> list[PageText]:
    out = []
    box = content_box_pt(paper)
    with pdfplumber.open(io.BytesIO(pdf)) as doc:
        for i, page in enumerate(doc.pages):
            out.append(
                PageText(
                    i,
                    float(page.width),
                    float(page.height),
                    page.extract_text(x_tolerance=X_TOLERANCE) or "",
                    page.extract_words(x_tolerance=X_TOLERANCE, extra_attrs=["size"]),
                    list(page.chars),
                    page.crop(box, strict=False).extract_text(x_tolerance=X_TOLERANCE) or "",
                    page.crop(_strip_box(paper, float(page.width), float(page.height)), strict=False).extract_text(
                        x_tolerance=X_TOLERANCE
                    )
                    or "",
                )
            )
    return out


def _strip_box(paper: str, width: float, height: float) -> tuple[float, float, float, float]:
    x0, top, x1, bottom = content_box_pt(paper)
    if PAPERS[paper].landscape:
        return x1 + 1, 0, width, height
    return 0, bottom + 1, width, height


def panel_pages(pages: list[PageText]) -> dict[str, list[PageText]]:
    """Panel tag → its pages (a schedule page starts with the heading 'PANEL <tag>')."""
    out: dict[str, list[PageText]] = {}
    for p in pages:
        m = re.search(r"^PANEL (\S+)", p.text, re.M)
        title = re.search(r"Panel schedule — (\S+)", p.text)
        if m and title and m.group(1) == title.group(1):
            out.setdefault(m.group(1), []).append(p)
    return out


def content_box_pt(paper: str) -> tuple[float, float, float, float]:
    """(x0, top, x1, bottom) of the page area inside the margins, in PDF points."""
    pp = PAPERS[paper]
    top, right, bottom, left = (float(v.removesuffix("in")) * 72 for v in pp.css_margin.split())
    return left, top, pp.width_in * 72 - right, pp.height_in * 72 - bottom


def schedule_markers(page: PageText) -> tuple[set[int], int]:
    """Slots whose circuit-number cell carries a delta marker, and the number of markers found
    in the two circuit-number columns (each marker must resolve to exactly one slot)."""
    ckt_heads = sorted((w for w in page.words if w["text"] == "CKT"), key=lambda w: w["x0"])
    assert len(ckt_heads) == 2, f"page {page.index}: expected two CKT column heads"
    columns = [(h["x0"] - 20, h["x1"] + 20) for h in ckt_heads]
    header_bottom = ckt_heads[0]["bottom"]
    numbers = [
        w
        for w in page.words
        if w["text"].isdigit()
        and w["size"] > 5.5
        and w["top"] > header_bottom
        and any(a <= (w["x0"] + w["x1"]) / 2 <= b for a, b in columns)
    ]
    slots: set[int] = set()
    count = 0
    for c in page.chars:
        if c["text"] != MARKER or c["top"] < header_bottom:
            continue
        cx = (c["x0"] + c["x1"]) / 2
        if not any(a <= cx <= b for a, b in columns):
            continue
        cy = (c["top"] + c["bottom"]) / 2
        row = [
            w for w in numbers if abs((w["top"] + w["bottom"]) / 2 - cy) < 4 and abs((w["x0"] + w["x1"]) / 2 - cx) < 30
        ]
        assert len(row) == 1, f"page {page.index}: marker at y={cy:.0f} does not sit beside one circuit number: {row}"
        slots.add(int(row[0]["text"]))
        count += 1
    return slots, count
