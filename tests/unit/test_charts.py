"""Charts: matplotlib SVG text, glyphs as paths, labelled axes, one mark per data point, stable bytes."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

from server.charts import GrowthChartData, ProfileChartData, growth_chart_svg, profile_chart_svg

SVG_NS = "{http://www.w3.org/2000/svg}"


def _data(**kw) -> GrowthChartData:
    base = dict(
        tag="T-9",
        labels=("Rev 1", "Rev 2", "Working copy"),
        connected_kva=(50.0, None, 60.0),
        demand_kva=(40.0, None, 47.0),
        demand_future_kva=(42.0, None, 52.0),
        pct=(53.0, None, 63.0),
        pct_future=(55.0, None, 69.0),
        rating_label="75 kVA transformer",
    )
    base.update(kw)
    return GrowthChartData(**base)


def test_growth_chart_is_inline_svg_with_paths_for_text() -> None:
    svg = growth_chart_svg(_data())
    assert svg.startswith("<svg")
    root = ET.fromstring(svg)  # well-formed XML
    assert root.tag == f"{SVG_NS}svg"
    assert "viewBox" in root.attrib and "width" not in root.attrib  # scales with the page
    # Text drawn as glyph paths: no <text> elements and no font dependency.
    assert root.find(f".//{SVG_NS}text") is None
    assert "Load growth of T-9" in svg  # title / aria-label
    # matplotlib names each artist group: axis labels and the legend are present.
    assert svg.count('id="legend_') >= 2
    assert re.search(r'id="text_\d+"', svg)


def test_growth_chart_draws_one_marker_per_existing_point() -> None:
    svg = growth_chart_svg(_data(pct=(None, None, None), pct_future=(None, None, None)))
    # Two snapshots have values (the middle one is missing): the demand line has two markers.
    root = ET.fromstring(svg)
    uses = [u for u in root.iter(f"{SVG_NS}use")]
    assert uses, "markers are drawn with <use>"
    lines = [g for g in root.iter(f"{SVG_NS}g") if g.attrib.get("id", "").startswith("line2d_")]
    assert lines


def test_same_data_same_bytes() -> None:
    assert growth_chart_svg(_data()) == growth_chart_svg(_data())


def test_different_data_different_chart() -> None:
    assert growth_chart_svg(_data()) != growth_chart_svg(_data(demand_kva=(41.0, None, 47.0)))


def test_profile_chart() -> None:
    days = tuple(f"2026-01-{d:02d}" for d in range(1, 31))
    peaks = tuple(40.0 + d for d in range(30))
    svg = profile_chart_svg(ProfileChartData("Metered demand at LP-9: m.csv", days, peaks, 69.0, "2026-01-30", 86.25))
    root = ET.fromstring(svg)
    assert root.find(f".//{SVG_NS}text") is None
    assert "Metered demand at LP-9" in svg
