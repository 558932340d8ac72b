"""A measure and its interval for each row of an evidence table (a forest plot).

Drawn like every riskshape figure (:mod:`riskshape.outputs.plots`): no pyplot, the caution in small
print, colours and markers from :mod:`riskshape.outputs.palette` only, each row styled by its
summary's dimension (H0, H1) or as a baseline.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.axes import Axes

from riskshape.outputs import palette
from riskshape.outputs.plots import new_axes

__all__ = ["plot_intervals"]


def plot_intervals(
    table: pd.DataFrame,
    measure: str = "auc",
    *,
    reference: float | None = 0.5,
    reference_label: str = "no information",
    ax: Axes | None = None,
) -> Axes:
    """A measure and its interval for each row of an evidence table, one line each (a forest plot).

    Parameters
    ----------
    table : pandas.DataFrame
        With columns ``measure``, ``<measure>_low`` and ``<measure>_high`` (e.g. from
        :func:`riskshape.research.evidence_table`); each row is labelled by its index (the last
        level's name picks the row's style: H0, H1 or baseline, by colour and marker).
    measure : str
        The measure to draw.
    reference : float, optional
        A vertical reference line (0.5 for an AUC, the published anchor for an F1); None for none.
    reference_label : str
        Its legend entry.
    ax : matplotlib.axes.Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn on.
    """
    ax = new_axes(ax, figsize=(7.0, 0.28 * len(table) + 1.2))
    names = [" | ".join(map(str, key)) if isinstance(key, tuple) else str(key) for key in table.index]
    seen: set[str] = set()
    for y, (key, row) in enumerate(table.iterrows()):
        column = str(key[-1] if isinstance(key, tuple) else key).removeprefix("base_")
        mark = palette.summary_mark(column)
        value, low, high = float(row[measure]), float(row[f"{measure}_low"]), float(row[f"{measure}_high"])
        label = mark.label if mark.label not in seen else None
        seen.add(mark.label)
        if np.isfinite(low) and np.isfinite(high):
            ax.hlines(y, low, high, color=mark.color, linestyle=mark.linestyle or "-", linewidth=1.6)
        ax.plot([value], [y], marker=mark.marker or "o", color=mark.color, linestyle="", label=label)
    if reference is not None:
        ax.axvline(
            reference,
            color=palette.THRESHOLD.color,
            linestyle=palette.THRESHOLD.linestyle,
            linewidth=1.0,
            label=reference_label,
        )
    ax.set_yticks(range(len(table)), names, fontsize=7, color=palette.INK)
    ax.invert_yaxis()
    ax.set_xlabel(f"{measure} (point and interval)", color=palette.INK)
    ax.legend(fontsize=7, loc="best")
    return ax
