"""Wear charts: well-formed, escaped SVG with points, limit and trend where the scale puts them.

Coordinates are hand-computed from the layout in webapp/charts.py: plot area x 64..584,
y 44..268 (224 high). The demo plug's readings and the 1.20 mm limit are demo data,
invented for the demo scenario (demo_scenarios/bramblecoast.yaml).
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import pytest

from webapp.charts import wear_chart_svg
from webapp.domain.wear import WearPoint, forecast, wear_rate

SVG = "{http://www.w3.org/2000/svg}"
DEMO = [WearPoint(210, 0.22), WearPoint(405, 0.41), WearPoint(600, 0.71), WearPoint(790, 1.02)]
LIMIT = 1.20  # mm, demo data, invented


def parsed(svg: str) -> ET.Element:
    return ET.fromstring(svg)


def points_of(root: ET.Element) -> list[ET.Element]:
    return [e for e in root.iter() if "point" in e.get("class", "").split()]


def test_chart_is_well_formed_accessible_svg_without_outside_references():
    fit = wear_rate(DEMO)
    svg = wear_chart_svg(DEMO, LIMIT, fit=fit, forecast=forecast(DEMO, LIMIT, 790, 200),
                         title="XP-4402 wear")
    root = parsed(svg)
    assert root.tag == SVG + "svg" and root.get("role") == "img"
    assert root.find(SVG + "title").text == "XP-4402 wear"
    desc = root.find(SVG + "desc").text
    assert "1.02 mm at 790 engine hours" in desc and "Limit 1.20 mm" in desc
    assert "replace now" in desc  # the demo plug's verdict (tests/domain/test_wear.py)
    assert "DejaVu Sans" in root.get("font-family")
    for outside in ("<script", "href", "url(", "<image", "@import"):
        assert outside not in svg
    assert len(points_of(root)) == 4


def test_text_is_escaped():
    svg = wear_chart_svg(DEMO, LIMIT, title='<&> "plug"', usage_label="h<1>")
    root = parsed(svg)  # would raise on a raw < or &
    assert root.find(SVG + "title").text == '<&> "plug"'
    assert "&lt;&amp;&gt;" in svg and "<&>" not in svg
    assert "h<1>" in root.find(SVG + "desc").text


def test_points_follow_usage_whatever_the_order_given():
    # Given out of order, and with erosion not rising with usage, so the pairing shows.
    given = [WearPoint(300, 0.5), WearPoint(100, 0.3), WearPoint(200, 0.1)]
    root = parsed(wear_chart_svg(given, LIMIT))
    xs = [float(p.get("cx")) for p in points_of(root)]
    ys = [float(p.get("cy")) for p in points_of(root)]
    assert xs == sorted(xs) and len(set(xs)) == 3
    # Hand computation: usage axis ends at 350 (330 = 1.1 × 300, ticks of 50), so
    # x = 64 + 520 × u / 350; erosion axis ends at 1.4 mm, so y = 268 − 160 × mm.
    assert xs == pytest.approx([64 + 520 * 100 / 350, 64 + 520 * 200 / 350,
                                64 + 520 * 300 / 350], abs=0.06)
    assert ys == pytest.approx([220.0, 252.0, 188.0], abs=0.06)


def test_limit_line_sits_at_the_hand_computed_height_and_is_labelled():
    root = parsed(wear_chart_svg(DEMO, LIMIT, fit=wear_rate(DEMO)))
    limit = next(e for e in root.iter(SVG + "line") if e.get("class") == "limit")
    # Erosion axis top: the first 0.2 mm tick at or above 1.15 × 1.20 = 1.38 → 1.4 mm.
    # y = 268 − 224 × 1.20 / 1.40 = 268 − 192 = 76.
    assert float(limit.get("y1")) == pytest.approx(76.0) == float(limit.get("y2"))
    assert limit.get("stroke-dasharray")
    texts = [t.text for t in root.iter(SVG + "text")]
    assert "limit 1.20 mm" in texts


def test_trend_is_extrapolated_to_the_limit():
    fit = wear_rate(DEMO)
    root = parsed(wear_chart_svg(DEMO, LIMIT, fit=fit))
    lines = {e.get("class"): e for e in root.iter(SVG + "line") if e.get("class")}
    assert float(lines["trend"].get("x1")) == pytest.approx(64 + 520 * 210 / 1000, abs=0.06)
    # The trend reaches 1.20 mm at (1.20 − intercept) / slope ≈ 925 engine hours, within twice
    # the last usage, so the usage axis runs to 1000 and the dashed extension ends on the
    # limit line.
    assert float(lines["extrapolation"].get("y2")) == pytest.approx(76.0, abs=0.06)
    crossing = (LIMIT - fit.intercept_mm) / fit.slope_mm_per_unit
    assert 900 < crossing < 950
    assert float(lines["extrapolation"].get("x2")) == pytest.approx(
        64 + 520 * crossing / 1000, abs=0.06)


def test_estimated_usage_is_marked_apart_with_a_legend_entry():
    mixed = [WearPoint(200, 0.07, estimated=True), WearPoint(400, 0.16)]
    root = parsed(wear_chart_svg(mixed, LIMIT))
    marks = points_of(root)
    assert [("estimated" in m.get("class")) for m in marks] == [True, False]
    assert marks[0].tag == SVG + "path" and marks[1].tag == SVG + "circle"
    legend = [t.text for t in root.iter(SVG + "text")]
    assert "gauged, usage estimated" in legend and "gauged" in legend
    counted = parsed(wear_chart_svg(DEMO, LIMIT))
    assert "gauged, usage estimated" not in [t.text for t in counted.iter(SVG + "text")]


def test_go_no_go_results_sit_on_the_limit_with_their_word():
    root = parsed(wear_chart_svg([WearPoint(100, 0.2), WearPoint(300, None, passed=False)],
                                 LIMIT))
    texts = [t.text for t in root.iter(SVG + "text")]
    assert "fail" in texts
    assert "go/no-go fail at 300 engine hours" in root.find(SVG + "desc").text
