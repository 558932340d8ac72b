"""Figures for research and reports (matplotlib, no pyplot state).

Every function takes ``ax=None`` (a new figure is made, on the Agg canvas, when none is given)
and returns the Axes it drew on (or the Figure, for multi-panel plots). The figures are made
without pyplot, so Jupyter's matplotlib integration (which registers its PNG formatter only
when ``%matplotlib inline`` runs or pyplot picks its backend) never sees them: each new figure is
a :class:`NotebookFigure`, which gives Jupyter its PNG itself (``_repr_png_``), with or without
that integration. Every figure carries
:data:`riskshape.caution.CAUTION_SHORT` in small print (:func:`add_caution`, called by each
function); :func:`save_figure` writes PNG and SVG. Colours, markers and line styles come from
:mod:`riskshape.outputs.palette` only, and every series differs from the others on its axes by
marker or line style as well as colour.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from io import BytesIO
from pathlib import Path
from typing import TypeVar, cast

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure, SubFigure
from matplotlib.layout_engine import ConstrainedLayoutEngine
from persim.landscapes import PersLandscapeApprox
from scipy.cluster.hierarchy import dendrogram, leaves_list, linkage
from scipy.spatial.distance import squareform

from riskshape.alerts.model import Firing
from riskshape.caution import CAUTION_SHORT
from riskshape.compute.distance import correlation_to_distance
from riskshape.compute.monitor import MonitorResult
from riskshape.outputs import palette
from riskshape.research.events import DrawdownEvents
from riskshape.types import CorrelationMatrix, Diagram, FloatArray

__all__ = [
    "add_caution",
    "save_figure",
    "new_axes",
    "plot_summary",
    "plot_summaries",
    "plot_diagram",
    "plot_barcode",
    "plot_landscape",
    "plot_dendrogram",
    "plot_correlation_heatmap",
    "window_correlation",
    "plot_window",
]

_CAUTION_GID = "riskshape-caution"
_FigureT = TypeVar("_FigureT", bound="Figure | SubFigure")


class NotebookFigure(Figure):
    """A matplotlib Figure that Jupyter shows as a PNG without pyplot (``_repr_png_``).

    IPython's display machinery asks an object for ``_repr_png_`` when no formatter is
    registered for its type; where the inline backend has registered one for ``Figure``, that
    one is used instead, so the figure is shown once either way.
    """

    def _repr_png_(self) -> bytes:
        """The figure as PNG bytes (100 dpi, trimmed to its drawn area), as Jupyter shows it.

        Returns
        -------
        bytes
        """
        buffer = BytesIO()
        self.savefig(buffer, format="png", dpi=100, bbox_inches="tight")
        return buffer.getvalue()


def _new_figure(figsize: tuple[float, float]) -> Figure:
    """A constrained-layout :class:`NotebookFigure` on the Agg canvas."""
    fig = NotebookFigure(figsize=figsize, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def add_caution(fig: _FigureT) -> _FigureT:
    """Put the caution in small print at the bottom right of ``fig`` (once).

    Returns
    -------
    matplotlib.figure.Figure or matplotlib.figure.SubFigure
        The same figure.
    """
    if not any(text.get_gid() == _CAUTION_GID for text in fig.texts):
        engine = fig.get_layout_engine()
        if isinstance(engine, ConstrainedLayoutEngine):
            engine.set(rect=(0.0, 0.025, 1.0, 0.975))  # keep the small print clear of the axes
        fig.text(
            0.995, 0.005, CAUTION_SHORT, ha="right", va="bottom", fontsize=6, color=palette.MUTED_INK, gid=_CAUTION_GID
        )
    return fig


def new_axes(ax: Axes | None = None, figsize: tuple[float, float] = (7.0, 4.0)) -> Axes:
    """``ax`` itself, or the Axes of a new Agg figure; the figure carries the caution either way."""
    if ax is None:
        fig = _new_figure(figsize)
        ax = fig.add_subplot()
    add_caution(ax.figure)
    return ax


def save_figure(fig: Figure, path_stem: str | Path) -> tuple[Path, Path]:
    """Write ``<path_stem>.png`` (150 dpi) and ``<path_stem>.svg``, caution included.

    Returns
    -------
    tuple of pathlib.Path
        The PNG and SVG paths.
    """
    stem = Path(path_stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    add_caution(fig)
    png, svg = stem.with_name(stem.name + ".png"), stem.with_name(stem.name + ".svg")
    fig.savefig(png, dpi=150)
    fig.savefig(svg)
    return png, svg


def _alert_dates(alerts: Sequence[Firing] | pd.DatetimeIndex | None) -> pd.DatetimeIndex:
    if alerts is None:
        return pd.DatetimeIndex([])
    if isinstance(alerts, pd.DatetimeIndex):
        return alerts
    return pd.DatetimeIndex([f.window_end for f in alerts])


def plot_summary(
    series: pd.Series,
    *,
    alerts: Sequence[Firing] | pd.DatetimeIndex | None = None,
    events: DrawdownEvents | None = None,
    regimes: pd.DataFrame | None = None,
    ax: Axes | None = None,
) -> Axes:
    """One summary over time, alerts as markers, events (start to trough) and regimes shaded.

    Parameters
    ----------
    series : pandas.Series
        Indexed by window end; drawn in its dimension's style (``h0_...``, ``h1_...``), or the
        baseline style for other summaries (:func:`riskshape.outputs.palette.summary_mark`).
    alerts : sequence of Firing or DatetimeIndex, optional
        Alerts on the series. Firings are marked by severity (a colour, a shape and the word in the
        legend) with the threshold in force beside each; bare dates get the one alert mark.
    events : DrawdownEvents, optional
        Shaded pale red and hatched from start to trough.
    regimes : pandas.DataFrame, optional
        Columns ``name``, ``start``, ``end`` (e.g. ``Scenario.regimes``): alternately shaded grey,
        with their names on top.
    ax : matplotlib.axes.Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn on.
    """
    ax = new_axes(ax)
    if regimes is not None:
        for i, row in enumerate(regimes.itertuples(index=False)):
            if i % 2:
                ax.axvspan(row.start, row.end, color=palette.REGIME_FILL, zorder=0)
            ax.text(
                row.start,
                1.0,
                f" {row.name}",
                transform=ax.get_xaxis_transform(),
                fontsize=7,
                va="top",
                color=palette.INK,
            )
    if events is not None:
        for i, row in enumerate(events.table.itertuples(index=False)):
            ax.axvspan(
                row.start,
                row.trough,
                facecolor=palette.EVENT_FILL,
                edgecolor=palette.ALERT.color,
                hatch=palette.EVENT_HATCH,
                linewidth=0.0,
                zorder=0,
                label="event" if i == 0 else None,
            )
    line = palette.summary_mark(str(series.name))
    ax.plot(
        series.index,
        series.to_numpy(dtype=float),
        lw=1.0,
        color=line.color,
        linestyle=line.linestyle,
        label=str(series.name),
    )
    _mark_alerts(ax, series, alerts)
    ax.set_ylabel(str(series.name))
    ax.legend(loc="upper left", fontsize=7, frameon=False)
    return ax


def _mark_alerts(ax: Axes, series: pd.Series, alerts: Sequence[Firing] | pd.DatetimeIndex | None) -> None:
    """Alert marks on ``series``: one per severity (and the thresholds) for firings, one kind for dates."""
    if alerts is None or isinstance(alerts, pd.DatetimeIndex):
        dates = _alert_dates(alerts)
        dates = dates[dates.isin(series.index)]
        if len(dates):
            _plot_marks(ax, dates, series.loc[dates].to_numpy(dtype=float), palette.ALERT, "alert")
        return
    shown = [f for f in alerts if f.window_end in series.index]
    for severity in palette.SEVERITIES:
        chosen = [f for f in shown if f.severity == severity]
        if chosen:
            dates = pd.DatetimeIndex([f.window_end for f in chosen])
            mark = palette.severity_mark(severity)
            _plot_marks(ax, dates, series.loc[dates].to_numpy(dtype=float), mark, f"alert: {mark.label}")
    if shown:
        dates = pd.DatetimeIndex([f.window_end for f in shown])
        _plot_marks(ax, dates, np.array([f.threshold for f in shown], dtype=float), palette.THRESHOLD, "threshold")


def _plot_marks(ax: Axes, x: pd.DatetimeIndex, y: np.ndarray, mark: palette.Mark, label: str) -> None:
    ax.plot(
        x,
        y,
        linestyle="",
        marker=mark.marker,
        color=mark.color,
        markeredgecolor=palette.INK if mark.marker != "_" else mark.color,
        markeredgewidth=0.6 if mark.marker != "_" else 1.5,
        ms=7,
        label=label,
    )


def plot_summaries(
    features: pd.DataFrame,
    columns: Sequence[str],
    *,
    alerts: Mapping[str, Sequence[Firing] | pd.DatetimeIndex] | None = None,
    events: DrawdownEvents | None = None,
    regimes: pd.DataFrame | None = None,
) -> Figure:
    """Several summaries stacked on a shared time axis (one :func:`plot_summary` each).

    ``alerts`` maps a column to its alerts.

    Parameters
    ----------
    features : pandas.DataFrame
        Summary columns indexed by window end.
    columns : sequence of str
        The columns to draw, top to bottom.
    alerts, events, regimes : optional
        As for :func:`plot_summary`; ``alerts`` per column.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    fig = _new_figure((8.0, 1.8 * len(columns) + 0.6))
    axes = fig.subplots(len(columns), 1, sharex=True, squeeze=False)[:, 0]
    for ax, col in zip(axes, columns):
        plot_summary(features[col], alerts=(alerts or {}).get(col), events=events, regimes=regimes, ax=ax)
    return add_caution(fig)


def plot_diagram(diagrams: Sequence[Diagram], *, ax: Axes | None = None) -> Axes:
    """Persistence diagram: (birth, death) of each finite bar, one colour and marker per dimension.

    Parameters
    ----------
    diagrams : sequence of Diagram
        One diagram per homology dimension.
    ax : matplotlib.axes.Axes, optional
        Where to draw; new axes by default.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn on.
    """
    ax = new_axes(ax, (4.5, 4.5))
    top = max([float(d[:, 1].max()) for d in diagrams if len(d)] or [1.0])
    for k, dgm in enumerate(diagrams):
        mark = palette.dimension_mark(k)
        ax.scatter(
            dgm[:, 0],
            dgm[:, 1],
            s=14,
            color=mark.color,
            marker=mark.marker,
            edgecolors=palette.INK,
            linewidths=0.3,
            label=f"{mark.label} ({len(dgm)})",
        )
    ax.plot([0, top * 1.05], [0, top * 1.05], color=palette.RULE, lw=0.8)
    ax.set_xlabel("birth")
    ax.set_ylabel("death")
    ax.legend(fontsize=7, frameon=False, loc="lower right")
    return ax


def plot_barcode(diagrams: Sequence[Diagram], *, ax: Axes | None = None) -> Axes:
    """Barcode: one horizontal bar per finite bar, grouped by dimension (colour and line style), longest first.

    Parameters
    ----------
    diagrams : sequence of Diagram
        One diagram per homology dimension.
    ax : matplotlib.axes.Axes, optional
        Where to draw; new axes by default.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn on.
    """
    ax = new_axes(ax, (5.0, 4.5))
    y = 0
    for k, dgm in enumerate(diagrams):
        order = np.argsort(dgm[:, 0] - dgm[:, 1]) if len(dgm) else np.empty(0, dtype=np.intp)
        for i, j in enumerate(order):
            # "" (hlines' default) keeps all but the first bar of a dimension out of the legend
            mark = palette.dimension_mark(k)
            label = mark.label if i == 0 else ""
            ax.hlines(y, dgm[j, 0], dgm[j, 1], color=mark.color, linestyles=mark.linestyle, lw=1.5, label=label)
            y += 1
        y += 2
    ax.set_yticks([])
    ax.set_xlabel("filtration value (distance)")
    ax.legend(fontsize=7, frameon=False, loc="lower right")
    return ax


def plot_landscape(
    dgm: Diagram, *, dim: int = 1, layers: int = 5, num_steps: int = 500, ax: Axes | None = None
) -> Axes:
    """First ``layers`` layers of the persistence landscape of one diagram (persim's PersLandscapeApprox).

    The layers are drawn in the dimension's colour, each with its own line style (and marker).

    Parameters
    ----------
    dgm : numpy.ndarray
        One diagram's finite bars.
    dim : int
        Its homology dimension (for the title).
    layers : int
        How many landscape layers to draw.
    num_steps : int
        Grid points of the approximation.
    ax : matplotlib.axes.Axes, optional
        Where to draw; new axes by default.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn on.
    """
    ax = new_axes(ax)
    if len(dgm) == 0:
        ax.text(0.5, 0.5, f"H{dim}: no bars", ha="center", transform=ax.transAxes, color=palette.INK)
        return ax
    colour = palette.dimension_mark(dim).color
    start, stop = float(dgm[:, 0].min()), float(dgm[:, 1].max())
    land = PersLandscapeApprox(start=start, stop=stop, num_steps=num_steps, dgms=[dgm], hom_deg=0)
    grid = np.linspace(start, stop, num_steps)
    for k, values in enumerate(np.atleast_2d(land.values)[:layers]):
        linestyle, marker = palette.layer_style(k)
        ax.plot(
            grid,
            values,
            lw=1.0,
            color=colour,
            linestyle=linestyle,
            marker=marker or "None",
            markevery=max(1, num_steps // 12),
            ms=3,
            label=f"lambda_{k + 1}",
        )
    ax.set_xlabel("filtration value")
    ax.set_ylabel(f"H{dim} landscape")
    ax.legend(fontsize=7, frameon=False)
    return ax


def _single_linkage(corr: CorrelationMatrix) -> FloatArray:
    return cast("FloatArray", linkage(squareform(correlation_to_distance(corr), checks=False), method="single"))


def plot_dendrogram(corr: CorrelationMatrix, labels: Sequence[str], *, ax: Axes | None = None) -> Axes:
    """Single-linkage dendrogram of the assets on d = sqrt(2 (1 - rho)) (scipy)."""
    ax = new_axes(ax, (8.0, 4.0))
    dendrogram(
        _single_linkage(corr),
        labels=list(labels),
        ax=ax,
        leaf_font_size=6,
        color_threshold=0,
        above_threshold_color=palette.INK,
    )
    ax.set_ylabel("merge distance (H0 death)")
    return ax


def plot_correlation_heatmap(corr: CorrelationMatrix, labels: Sequence[str], *, ax: Axes | None = None) -> Axes:
    """Correlation matrix with rows and columns in the single-linkage dendrogram's leaf order."""
    ax = new_axes(ax, (6.0, 5.0))
    order = leaves_list(_single_linkage(corr)) if len(labels) > 1 else np.arange(len(labels))
    image = ax.imshow(corr[np.ix_(order, order)], vmin=-1.0, vmax=1.0, cmap=palette.diverging_colormap())
    names = [labels[int(i)] for i in order]
    ax.set_xticks(range(len(names)), names, rotation=90, fontsize=5)
    ax.set_yticks(range(len(names)), names, fontsize=5)
    ax.figure.colorbar(image, ax=ax, shrink=0.8, label="correlation")
    return ax


def window_correlation(result: MonitorResult, window_end: object) -> tuple[CorrelationMatrix, tuple[str, ...]]:
    """Correlation matrix and asset names of one window of a run, as the monitor computed them."""
    window = result.window(window_end)
    return window.correlation, window.assets


def plot_window(result: MonitorResult, window_end: object) -> Figure:
    """One window on one page: diagram, barcode, H1 (or H0) landscape, dendrogram, ordered heatmap.

    Parameters
    ----------
    result : MonitorResult
        The run holding the window.
    window_end : date-like
        The window's end date.

    Returns
    -------
    matplotlib.figure.Figure
        The page.
    """
    diagrams = tuple(result.diagram(window_end, k) for k in range(result.config.maxdim + 1))
    corr, labels = window_correlation(result, window_end)
    fig = _new_figure((12.0, 8.0))
    grid = fig.add_gridspec(2, 3)
    plot_diagram(diagrams, ax=fig.add_subplot(grid[0, 0]))
    plot_barcode(diagrams, ax=fig.add_subplot(grid[0, 1]))
    dim = min(1, result.config.maxdim)
    plot_landscape(diagrams[dim], dim=dim, ax=fig.add_subplot(grid[0, 2]))
    plot_dendrogram(corr, labels, ax=fig.add_subplot(grid[1, :2]))
    plot_correlation_heatmap(corr, labels, ax=fig.add_subplot(grid[1, 2]))
    fig.suptitle(f"window ending {pd.Timestamp(window_end).date()} ({len(labels)} assets)", color=palette.INK)
    return add_caution(fig)
