"""Small inline SVG charts for the console pages, drawn from numbers alone (no I/O, no state).

Colours, markers and line styles come from :mod:`riskshape.outputs.palette`; each severity is
drawn with its own shape (circle, diamond, cross) and named in the chart's text alternative, so
nothing depends on colour. Every chart is an ``<svg role="img">`` with a ``<title>`` that says
what it shows, for screen readers.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from html import escape

import numpy as np
from scipy.cluster.hierarchy import leaves_list, linkage
from scipy.spatial.distance import squareform

import riskshape.outputs.palette as palette

__all__ = ["Mark", "severity_shape", "line_chart", "heatmap", "barcode", "leaf_order"]

_DASH = {"-": "", "--": "6 3", ":": "2 3", "-.": "6 3 2 3", "": ""}


@dataclass(frozen=True)
class Mark:
    """An alert drawn on a line chart: its position in the series, its severity and a label."""

    position: int
    severity: str
    label: str


def _fmt(value: float) -> str:
    """A value for reading: three significant digits."""
    return "n/a" if not math.isfinite(value) else f"{value:.3g}"


def severity_shape(severity: str, x: float, y: float, size: float = 5.0) -> str:
    """The SVG of one severity's shape at (x, y): info a circle, warning a diamond, critical a cross."""
    mark = palette.severity_mark(severity)
    fill = f'fill="{mark.color}" stroke="{palette.INK}" stroke-width="1"'
    if mark.marker == "o":
        return f'<circle cx="{x:.1f}" cy="{y:.1f}" r="{size:.1f}" {fill}/>'
    if mark.marker == "D":
        s = size * 1.3
        points = f"{x:.1f},{y - s:.1f} {x + s:.1f},{y:.1f} {x:.1f},{y + s:.1f} {x - s:.1f},{y:.1f}"
        return f'<polygon points="{points}" {fill}/>'
    s, w = size * 1.1, size * 0.45
    cross = (
        f"M{x - s:.1f},{y - s + w:.1f} L{x - s + w:.1f},{y - s:.1f} L{x:.1f},{y - w:.1f} L{x + s - w:.1f},{y - s:.1f} "
        f"L{x + s:.1f},{y - s + w:.1f} L{x + w:.1f},{y:.1f} L{x + s:.1f},{y + s - w:.1f} L{x + s - w:.1f},{y + s:.1f} "
        f"L{x:.1f},{y + w:.1f} L{x - s + w:.1f},{y + s:.1f} L{x - s:.1f},{y + s - w:.1f} L{x - w:.1f},{y:.1f} Z"
    )
    return f'<path d="{cross}" {fill}/>'


def _scale(values: Sequence[float], low: float, high: float) -> tuple[float, float]:
    finite = [v for v in values if math.isfinite(v)]
    if not finite:
        return 0.0, 1.0
    lo, hi = min(finite), max(finite)
    if hi - lo < 1e-12:
        lo, hi = lo - 0.5, hi + 0.5
    pad = (hi - lo) * 0.08
    return lo - pad, hi + pad


def _path(xs: Sequence[float], ys: Sequence[float]) -> str:
    """An SVG path through the points, broken where a value is missing."""
    parts, pen_down = [], False
    for x, y in zip(xs, ys):
        if not math.isfinite(y):
            pen_down = False
            continue
        parts.append(f"{'L' if pen_down else 'M'}{x:.1f},{y:.1f}")
        pen_down = True
    return " ".join(parts)


def line_chart(
    values: Sequence[float],
    *,
    title: str,
    first_label: str = "",
    last_label: str = "",
    threshold: Sequence[float] | None = None,
    marks: Sequence[Mark] = (),
    series_mark: palette.Mark = palette.BASELINE,
    width: int = 640,
    height: int = 180,
    small: bool = False,
) -> str:
    """A summary over time as SVG: its line, the threshold in force (dash-dot) and alerts as shapes.

    Parameters
    ----------
    values : sequence of float
        The summary at each window (NaN where missing).
    title : str
        What the chart shows; read out by screen readers (with the counts of alerts by severity).
    first_label, last_label : str
        Labels of the first and last window (dates), written under the axis.
    threshold : sequence of float, optional
        The rule's threshold at each window (NaN where not yet defined).
    marks : sequence of Mark
        Alerts to draw, each with its severity's shape.
    series_mark : riskshape.outputs.palette.Mark
        Colour and line style of the series.
    width, height : int
        Size in pixels.
    small : bool
        A trend line without axis labels (for the overview).

    Returns
    -------
    str
        The ``<svg>`` element.
    """
    n = len(values)
    left, right, top, bottom = (4, 4, 4, 4) if small else (56, 12, 10, 26)
    plot_w, plot_h = width - left - right, height - top - bottom
    lo, hi = _scale([*values, *(threshold or [])], 0, 0)
    xs = [left + (plot_w * i / max(n - 1, 1)) for i in range(n)]

    def y_of(v: float) -> float:
        return top + plot_h * (1 - (v - lo) / (hi - lo)) if math.isfinite(v) else math.nan

    counts: dict[str, int] = {}
    for m in marks:
        counts[m.severity] = counts.get(m.severity, 0) + 1
    said = ", ".join(f"{k} {word}" for word, k in counts.items())
    alt = f"{title}; {n} windows" + (f"; alerts: {said}" if said else "")
    out = [
        f'<svg class="chart" role="img" viewBox="0 0 {width} {height}" width="{width}" height="{height}" '
        f'xmlns="http://www.w3.org/2000/svg"><title>{escape(alt)}</title>'
    ]
    if not small:
        out.append(
            f'<line x1="{left}" y1="{top + plot_h}" x2="{left + plot_w}" y2="{top + plot_h}" stroke="{palette.RULE}"/>'
            f'<line x1="{left}" y1="{top}" x2="{left}" y2="{top + plot_h}" stroke="{palette.RULE}"/>'
            f'<text x="{left - 4}" y="{top + 9}" text-anchor="end" class="tick">{_fmt(hi)}</text>'
            f'<text x="{left - 4}" y="{top + plot_h}" text-anchor="end" class="tick">{_fmt(lo)}</text>'
            f'<text x="{left}" y="{height - 8}" class="tick">{escape(first_label)}</text>'
            f'<text x="{left + plot_w}" y="{height - 8}" text-anchor="end" class="tick">{escape(last_label)}</text>'
        )
    if threshold is not None:
        dash = _DASH[palette.THRESHOLD.linestyle]
        path = _path(xs, [y_of(v) for v in threshold])
        out.append(
            f'<path d="{path}" fill="none" stroke="{palette.THRESHOLD.color}" stroke-width="1.5" '
            f'stroke-dasharray="{dash}"><title>threshold</title></path>'
        )
    dash = _DASH[series_mark.linestyle]
    out.append(
        f'<path d="{_path(xs, [y_of(v) for v in values])}" fill="none" stroke="{series_mark.color}" '
        f'stroke-width="{1.5 if small else 1.8}" stroke-dasharray="{dash}"/>'
    )
    for m in marks:
        if 0 <= m.position < n and math.isfinite(values[m.position]):
            shape = severity_shape(m.severity, xs[m.position], y_of(values[m.position]), 3.5 if small else 5.0)
            out.append(f"<g><title>{escape(m.label)}</title>{shape}</g>")
    out.append("</svg>")
    return "".join(out)


def leaf_order(distance: np.ndarray) -> list[int]:
    """The order of assets along a single-linkage dendrogram of a distance matrix (scipy's leaves)."""
    n = distance.shape[0]
    if n < 3:
        return list(range(n))
    condensed = squareform(np.asarray(distance, dtype=float), checks=False)
    return [int(i) for i in leaves_list(linkage(condensed, method="single"))]


def _diverging(value: float) -> str:
    """The palette's diverging colour of a correlation in [-1, 1]."""
    steps = palette.DIVERGING
    clipped = min(max(value, -1.0), 1.0)
    return steps[round((clipped + 1.0) / 2.0 * (len(steps) - 1))]


def heatmap(corr: np.ndarray, labels: Sequence[str], *, title: str, cell: int = 18) -> str:
    """A correlation matrix as an SVG heatmap, rows and columns in single-linkage order.

    Each cell carries its pair and value as a tooltip; the order groups assets that move together.

    Parameters
    ----------
    corr : numpy.ndarray
        (n, n) correlation matrix.
    labels : sequence of str
        Asset names, in the matrix's order.
    title : str
        What the chart shows (screen readers).
    cell : int
        Cell size in pixels.

    Returns
    -------
    str
        The ``<svg>`` element.
    """
    distance = np.sqrt(np.clip(2.0 * (1.0 - np.asarray(corr, dtype=float)), 0.0, 4.0))
    order = leaf_order(distance)
    n = len(order)
    margin = 8 + 7 * max((len(labels[i]) for i in order), default=1)
    size = margin + n * cell + 4
    out = [
        f'<svg class="chart" role="img" viewBox="0 0 {size} {size}" width="{size}" height="{size}" '
        f'xmlns="http://www.w3.org/2000/svg"><title>{escape(title)}</title>'
    ]
    for r, i in enumerate(order):
        y = margin + r * cell
        out.append(f'<text x="{margin - 4}" y="{y + cell * 0.7:.1f}" text-anchor="end" class="tick">')
        out.append(f"{escape(labels[i])}</text>")
        x = margin + r * cell + cell * 0.7
        out.append(f'<text transform="translate({x:.1f},{margin - 4}) rotate(-90)" class="tick">')
        out.append(f"{escape(labels[i])}</text>")
        for c, j in enumerate(order):
            value = float(corr[i, j])
            out.append(
                f'<rect x="{margin + c * cell}" y="{y}" width="{cell}" height="{cell}" fill="{_diverging(value)}">'
                f"<title>{escape(labels[i])} / {escape(labels[j])}: {value:.2f}</title></rect>"
            )
    out.append("</svg>")
    return "".join(out)


def barcode(bars: np.ndarray, *, title: str, width: int = 640, row: int = 9) -> str:
    """Finite bars of a diagram as an SVG barcode (longest first), from the first birth to the last death.

    Parameters
    ----------
    bars : numpy.ndarray
        (n, 2) births and deaths.
    title : str
        What the chart shows (screen readers).
    width, row : int
        Width in pixels, and the height of one bar's row.

    Returns
    -------
    str
        The ``<svg>`` element.
    """
    bars = np.asarray(bars, dtype=float).reshape(-1, 2)
    order = np.argsort(bars[:, 0] - bars[:, 1], kind="stable")
    low = float(bars[:, 0].min()) if len(bars) else 0.0
    top = float(bars[:, 1].max()) if len(bars) else 1.0
    height = max(len(bars), 1) * row + 22
    mark = palette.dimension_mark(1)
    out = [
        f'<svg class="chart" role="img" viewBox="0 0 {width} {height}" width="{width}" height="{height}" '
        f'xmlns="http://www.w3.org/2000/svg"><title>{escape(title)}</title>'
    ]
    scale = (width - 20) / ((top - low) or 1.0)
    for r, k in enumerate(order):
        birth, death = bars[k]
        y = 4 + r * row
        out.append(
            f'<rect x="{10 + (birth - low) * scale:.1f}" y="{y}" width="{max((death - birth) * scale, 1):.1f}" '
            f'height="{row - 3}" fill="{mark.color}"><title>birth {birth:.4g}, death {death:.4g}</title></rect>'
        )
    out.append(f'<text x="10" y="{height - 4}" class="tick">{low:.3g}</text>')
    out.append(f'<text x="{width - 10}" y="{height - 4}" text-anchor="end" class="tick">{top:.3g}</text></svg>')
    return "".join(out)
