"""riskshape's figures show as PNG in Jupyter without pyplot or ``%matplotlib inline``.

The check asks IPython's own display machinery (``IPython.core.formatters.DisplayFormatter``, the
formatter a kernel uses for a cell's result) what it would send for a figure; the PNG signature is
from the PNG specification (ISO/IEC 15948, section 5.2).
"""

from __future__ import annotations

import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.outputs import plots

formatters = pytest.importorskip("IPython.core.formatters", reason="IPython comes with the notebooks extra")

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def run(small_prices: pd.DataFrame):
    return monitor(small_prices, Config(window=20, step=2, compute={"executor": "serial"}))


def test_figures_give_jupyter_a_png(run) -> None:
    figures = [
        plots.plot_summaries(run.features, ["mean_correlation", "h0_total_persistence"]),
        plots.plot_window(run, run.window_ends[-1]),
        plots.plot_summary(run.features["h0_entropy"]).figure,
    ]
    for fig in figures:
        data, _ = formatters.DisplayFormatter().format(fig)
        assert data["image/png"].startswith(PNG_SIGNATURE)
        assert "Figure size" in data["text/plain"]  # the text form stays for plain frontends


def test_the_png_is_the_figure_itself(run) -> None:
    fig = plots.plot_summaries(run.features, ["mean_correlation"])
    png = fig._repr_png_()
    # width and height from the IHDR chunk (PNG specification, section 11.2.2): trimmed to the drawn
    # area plus matplotlib's tight-box pad (savefig.pad_inches, 0.1 inch a side), so about the
    # figure's size at 100 dpi
    width, height = int.from_bytes(png[16:20], "big"), int.from_bytes(png[20:24], "big")
    full_width, full_height = fig.get_size_inches() * 100
    assert full_width / 2 < width <= full_width + 21
    assert full_height / 2 < height <= full_height + 21


def test_interval_plot_draws_each_row_in_palette_colours_and_shows_in_jupyter() -> None:
    from matplotlib.colors import to_hex

    from riskshape.outputs import palette, plot_intervals

    table = pd.DataFrame(
        {"auc": [0.6, 0.55, 0.5], "auc_low": [0.5, 0.4, float("nan")], "auc_high": [0.7, 0.66, float("nan")]},
        index=["h0_entropy", "h1_landscape_l1", "base_ew_volatility"],
    )
    ax = plot_intervals(table, "auc")
    assert [t.get_text() for t in ax.get_yticklabels()] == list(table.index)
    assert len(ax.collections) == 2  # a row without an interval gets its point only
    colours = {to_hex(c) for coll in ax.collections for c in coll.get_colors()} | {
        to_hex(line.get_color()) for line in ax.lines
    }
    assert colours <= {c.lower() for c in palette.colours()}
    assert [t.get_text() for t in ax.get_legend().get_texts()] == ["H0", "H1", "baseline", "no information"]
    data, _ = formatters.DisplayFormatter().format(ax.figure)
    assert data["image/png"].startswith(PNG_SIGNATURE)
