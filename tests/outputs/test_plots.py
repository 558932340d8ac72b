"""Plots: every figure carries the caution; files are written; the heatmap follows the dendrogram."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from scipy.cluster.hierarchy import leaves_list, linkage
from scipy.spatial.distance import squareform

from riskshape import Config, monitor
from riskshape.caution import CAUTION_SHORT
from riskshape.outputs import plots
from riskshape.research.events import portfolio_drawdown_events


@pytest.fixture(scope="module")
def run(small_prices: pd.DataFrame):
    return monitor(small_prices, Config(window=20, step=2, compute={"executor": "serial"}))


def _has_caution(fig: Figure) -> bool:
    return sum(text.get_text() == CAUTION_SHORT for text in fig.texts) == 1


def test_each_plot_returns_its_axes_and_carries_the_caution(run) -> None:
    end = run.window_ends[-1]
    diagrams = [run.diagram(end, k) for k in range(2)]
    corr, labels = plots.window_correlation(run, end)
    events = portfolio_drawdown_events(run.prices, 0.02)
    drawn = [
        plots.plot_summary(run.features["h0_total_persistence"], alerts=run.window_ends[[3, 7]], events=events),
        plots.plot_diagram(diagrams),
        plots.plot_barcode(diagrams),
        plots.plot_landscape(diagrams[0], dim=0),
        plots.plot_dendrogram(corr, labels),
        plots.plot_correlation_heatmap(corr, labels),
    ]
    for ax in drawn:
        assert isinstance(ax, Axes)
        assert _has_caution(ax.figure)
    for fig in (plots.plot_window(run, end), plots.plot_summaries(run.features, ["mean_correlation", "h1_n_bars"])):
        assert isinstance(fig, Figure) and _has_caution(fig)


def test_plotting_on_a_given_axes_uses_it(run) -> None:
    fig = Figure()
    ax = fig.add_subplot()
    assert plots.plot_summary(run.features["mean_correlation"], ax=ax) is ax
    assert _has_caution(fig)
    plots.plot_diagram([run.diagram(run.window_ends[0], 0)], ax=ax)
    assert _has_caution(fig)  # once, however many plots share the figure


def test_save_figure_writes_png_and_svg(run, tmp_path: Path) -> None:
    fig = plots.plot_window(run, run.window_ends[5])
    png, svg = plots.save_figure(fig, tmp_path / "figs" / "window")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert CAUTION_SHORT.split(" - ")[0] in svg.read_text(encoding="utf-8")


def test_heatmap_follows_the_single_linkage_leaf_order(run) -> None:
    corr, labels = plots.window_correlation(run, run.window_ends[-1])
    ax = plots.plot_correlation_heatmap(corr, labels)
    distance = np.sqrt(np.clip(2 * (1 - corr), 0, 4))  # Mantegna's distance, written out
    np.fill_diagonal(distance, 0)
    order = leaves_list(linkage(squareform(distance, checks=False), method="single"))  # scipy as the reference
    assert [t.get_text() for t in ax.get_xticklabels()] == [labels[i] for i in order]
