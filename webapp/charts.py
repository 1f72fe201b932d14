"""Wear charts as self-contained SVG, drawn on the station for pages and PDF records alike.

Layout (pixels): a 620 × 340 canvas, the plot area from x 64 to 584 and from y 44 to 268
(224 high). The erosion axis starts at 0 mm and ends at the first tick at or above 1.15 ×
the larger of the limit and the largest gauged erosion; the usage axis starts at 0 and
ends past the last inspection (and past the trend's crossing of the limit when it comes
within twice the last usage). Text is escaped; nothing outside the string is referenced.
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Sequence
from html import escape

from .domain.wear import WearFit, WearForecast, WearPoint

WIDTH, HEIGHT = 620, 340
LEFT, RIGHT, TOP, BOTTOM = 64, 584, 44, 268
INK, LIMIT, TREND, PAPER = "#111111", "#8a0000", "#0b3d91", "#ffffff"


def _nice_step(span: float) -> float:
    """The largest of 1, 2 or 5 × 10^k that cuts `span` into five or more ticks."""
    raw = span / 5
    magnitude = 10 ** math.floor(math.log10(raw))
    return max(m * magnitude for m in (1, 2, 5) if m * magnitude <= raw * (1 + 1e-9))


def _axis_top(largest: float) -> tuple[float, float]:
    """(top, step): the first tick at or above `largest`."""
    step = _nice_step(largest)
    return math.ceil(largest / step - 1e-9) * step, step


def _tick(value: float, step: float) -> str:
    """A tick label with as many decimals as the step needs (0.2 mm steps: 1.0, 1.2)."""
    return f"{value:.{max(0, -math.floor(math.log10(step) + 1e-9))}f}"


def _text(x: float, y: float, text: str, anchor: str = "start", size: int = 14,
          weight: str = "normal", fill: str = INK) -> str:
    return (f'<text x="{x:.1f}" y="{y:.1f}" text-anchor="{anchor}" font-size="{size}" '
            f'font-weight="{weight}" fill="{fill}">{escape(text)}</text>')


def _line(x1: float, y1: float, x2: float, y2: float, stroke: str = INK, width: float = 1.5,
          dash: str | None = None, cls: str | None = None) -> str:
    extra = (f' stroke-dasharray="{dash}"' if dash else "") + (f' class="{cls}"' if cls else "")
    return (f'<line x1="{x1:.1f}" y1="{y1:.1f}" x2="{x2:.1f}" y2="{y2:.1f}" stroke="{stroke}" '
            f'stroke-width="{width}"{extra}/>')


def _marker(x: float, y: float, estimated: bool, cls: str = "point") -> str:
    if estimated:  # hollow diamond: a shape, not only a colour, tells it apart
        return (f'<path class="{cls} estimated" d="M{x:.1f} {y - 6:.1f} L{x + 6:.1f} {y:.1f} '
                f'L{x:.1f} {y + 6:.1f} L{x - 6:.1f} {y:.1f} Z" fill="{PAPER}" stroke="{INK}" '
                f'stroke-width="2"/>')
    return f'<circle class="{cls}" cx="{x:.1f}" cy="{y:.1f}" r="5" fill="{INK}"/>'


def limit_crossing(fit: WearFit | None, limit_mm: float) -> float | None:
    """The usage at which the trend reaches the limit, or None without a rising trend."""
    if fit is None or fit.too_few or not fit.slope_mm_per_unit or fit.slope_mm_per_unit <= 0:
        return None
    assert fit.intercept_mm is not None
    return (limit_mm - fit.intercept_mm) / fit.slope_mm_per_unit


def wear_chart_svg(points: Sequence[WearPoint], limit_mm: float, fit: WearFit | None = None,
                   forecast: WearForecast | None = None, title: str = "Igniter plug wear",
                   usage_label: str = "engine hours") -> str:
    """The plug's erosion against usage: gauged points, the limit, the trend to the limit.

    `usage_label` names the x axis in engine hours ("engine hours since fitted", or the
    engine's totals where the fit is not known); never flight hours."""
    gauged = sorted((p for p in points if p.erosion_mm is not None), key=lambda p: p.usage)
    go_no_go = sorted((p for p in points if p.erosion_mm is None), key=lambda p: p.usage)
    last = max((p.usage for p in points), default=0.0)
    crossing = limit_crossing(fit, limit_mm)
    reach = crossing if crossing is not None and crossing <= 2 * max(last, 1.0) else None
    x_top, x_step = _axis_top(max(last * 1.1, (reach or 0) * 1.05, 1.0))
    largest = max([limit_mm] + [float(p.erosion_mm or 0) for p in gauged])
    y_top, y_step = _axis_top(1.15 * largest)

    def sx(usage: float) -> float:
        return LEFT + (RIGHT - LEFT) * usage / x_top

    def sy(mm: float) -> float:
        return BOTTOM - (BOTTOM - TOP) * mm / y_top

    ident = "wear-" + hashlib.sha256(title.encode()).hexdigest()[:10]
    said = "; ".join(f"{p.erosion_mm:.2f} mm at {p.usage:g} {usage_label}"
                     + (" (usage partly estimated)" if p.estimated else "") for p in gauged)
    said += "".join(f"; go/no-go {'pass' if p.passed else 'fail'} at {p.usage:g} {usage_label}"
                    for p in go_no_go)
    desc = [f"Erosion in mm against {usage_label}: {said or 'no inspections'}.",
            f"Limit {limit_mm:.2f} mm."]
    if fit is not None and not fit.too_few and fit.slope_mm_per_unit is not None:
        desc.append(f"Theil–Sen trend {fit.slope_mm_per_unit:.5f} mm per engine hour"
                    + (f", reaching the limit at about {crossing:.0f} {usage_label}."
                       if crossing is not None else ", no rise towards the limit."))
    if forecast is not None:
        desc.append(f"Verdict (advisory): {forecast.verdict}.")

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH} {HEIGHT}" '
           f'width="{WIDTH}" height="{HEIGHT}" role="img" aria-labelledby="{ident}-t {ident}-d" '
           f'font-family="DejaVu Sans, Liberation Sans, Arial, sans-serif" class="wear-chart">',
           f'<title id="{ident}-t">{escape(title)}</title>',
           f'<desc id="{ident}-d">{escape(" ".join(desc))}</desc>',
           f'<rect x="0" y="0" width="{WIDTH}" height="{HEIGHT}" fill="{PAPER}"/>',
           _text(16, 20, title, size=16, weight="bold")]
    for i in range(round(y_top / y_step) + 1):
        mm = i * y_step
        out += [_line(LEFT - 5, sy(mm), LEFT, sy(mm)),
                _text(LEFT - 8, sy(mm) + 4, _tick(mm, y_step), "end")]
    for i in range(round(x_top / x_step) + 1):
        usage = i * x_step
        out += [_line(sx(usage), BOTTOM, sx(usage), BOTTOM + 5),
                _text(sx(usage), BOTTOM + 19, _tick(usage, x_step), "middle")]
    out += [_line(LEFT, TOP, LEFT, BOTTOM, width=2), _line(LEFT, BOTTOM, RIGHT, BOTTOM, width=2),
            _text((LEFT + RIGHT) / 2, BOTTOM + 38, usage_label,
                  "middle"),
            f'<text x="16" y="{(TOP + BOTTOM) / 2:.1f}" font-size="14" fill="{INK}" '
            f'text-anchor="middle" transform="rotate(-90 16 {(TOP + BOTTOM) / 2:.1f})">'
            f'erosion (mm)</text>',
            _line(LEFT, sy(limit_mm), RIGHT, sy(limit_mm), LIMIT, 2.5, "8 5", "limit"),
            _text(RIGHT - 4, sy(limit_mm) - 6, f"limit {limit_mm:.2f} mm", "end",
                  weight="bold", fill=LIMIT)]
    legend = [("point", "gauged")] if any(not p.estimated for p in gauged) else []
    if fit is not None and fit.wear_at(0) is not None and gauged:
        first, end = gauged[0].usage, gauged[-1].usage
        out.append(_line(sx(first), sy(fit.wear_at(first) or 0), sx(end),
                         sy(fit.wear_at(end) or 0), TREND, 2.5, cls="trend"))
        stop = reach if reach is not None else x_top
        if stop > end:
            out.append(_line(sx(end), sy(fit.wear_at(end) or 0), sx(stop),
                             sy(fit.wear_at(stop) or 0), TREND, 2, "3 4",
                             "extrapolation"))
        legend += [("trend", "Theil–Sen trend"), ("extrapolation", "extrapolated")]
    for p in gauged:
        out += [_marker(sx(p.usage), sy(float(p.erosion_mm or 0)), p.estimated),
                _text(sx(p.usage), sy(float(p.erosion_mm or 0)) - 10, f"{p.erosion_mm:.2f}",
                      "middle", size=13, weight="bold")]
    for p in go_no_go:
        out += [_marker(sx(p.usage), sy(limit_mm), p.estimated, "go-no-go"),
                _text(sx(p.usage), sy(limit_mm) + 20, "pass" if p.passed else "fail",
                      "middle", size=13, weight="bold")]
    if any(p.estimated for p in points):
        legend.append(("estimated", "gauged, usage estimated"))
    out.append(_legend(legend))
    out.append("</svg>")
    return "\n".join(out)


def _legend(entries: list[tuple[str, str]]) -> str:
    parts, x, y = [], 16.0, HEIGHT - 12.0
    for kind, label in entries:
        if kind == "point":
            parts.append(f'<circle cx="{x + 6:.1f}" cy="{y - 4:.1f}" r="5" fill="{INK}"/>')
        elif kind == "estimated":
            parts.append(f'<path d="M{x + 6:.1f} {y - 10:.1f} l6 6 l-6 6 l-6 -6 Z" '
                         f'fill="{PAPER}" stroke="{INK}" stroke-width="2"/>')
        else:
            parts.append(_line(x, y - 4, x + 18, y - 4, TREND, 2.5,
                               "3 4" if kind == "extrapolation" else None))
        parts.append(_text(x + 24, y, label, size=12))
        x += 24 + 7.2 * len(label) + 18
    return '<g class="legend">' + "".join(parts) + "</g>"
