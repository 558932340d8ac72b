"""Do the summaries' changes warn where their levels do not? The event study over change horizons.

Recent work on industry portfolios reports that the static topological summaries move with the
average correlation, while their rates of change over 80 to 100 trading days carry information
of their own. :func:`change_study` lets a quant test that on their own history: it runs
:func:`riskshape.research.study_table` over each summary's level and its changes
(:func:`riskshape.compute.derived.summary_changes`, the same columns as ``[derived]
change_horizons``) side by side, with the mean correlation and its changes as the yardstick.

A change inherits its summary's crisis direction (:func:`riskshape.research.crisis_direction`):
a summary that falls in a crisis warns by a negative change. Many rows are tested at once and
the windows overlap: read the table as a screen, not as a test.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Literal

import pandas as pd

from riskshape.compute.derived import summary_changes, topological_columns
from riskshape.errors import ConfigError
from riskshape.research.events import DrawdownEvents
from riskshape.research.study import crisis_direction, study_table
from riskshape.types import Direction

__all__ = ["change_study"]


def change_study(
    features: pd.DataFrame,
    events: DrawdownEvents,
    *,
    horizons: Sequence[int] = (20, 60, 100),
    step: int = 1,
    columns: Sequence[str] | None = None,
    directions: Mapping[str, Direction] | None = None,
    horizon: int = 20,
    lookback: int = 120,
    trend: Literal["level", "variance"] = "level",
    post_event_days: int = 0,
) -> pd.DataFrame:
    """The event study of each summary's level and of its changes over ``horizons`` trading days.

    Parameters
    ----------
    features : pandas.DataFrame
        ``MonitorResult.features`` (or any summaries indexed by window end).
    events : DrawdownEvents
        From :func:`riskshape.research.portfolio_drawdown_events` on the same prices.
    horizons : sequence of int
        Trading days of each change; multiples of ``step``.
    step : int
        Trading days between windows (the configuration's ``step``).
    columns : sequence of str, optional
        Summaries to study; default ``mean_correlation`` and every topological (``h{k}_*``) column.
    directions : mapping, optional
        Crisis direction per summary, over :func:`riskshape.research.crisis_direction`; each
        change column takes its summary's.
    horizon, lookback, trend, post_event_days
        See :func:`riskshape.research.event_study`.

    Returns
    -------
    pandas.DataFrame
        :func:`riskshape.research.study_table`'s table (index ``signal``: the summary, or
        ``{summary}_chg_{h}``) with two more columns first: ``summary`` and ``change_days``
        (0 for the level).

    Raises
    ------
    ConfigError
        If a column is not in ``features``, or a horizon is not a positive multiple of ``step``.

    Warns
    -----
    ResearchWarning
        When a measure is NaN, with the reason (as :func:`riskshape.research.study_table`).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from riskshape.research import events_from_periods
    >>> days = pd.bdate_range("2031-01-01", periods=400)
    >>> events = events_from_periods(
    ...     pd.DataFrame({"start": [days[330]], "end": [days[340]]}), pd.Series(1.0, index=days)
    ... )
    >>> wave = np.sin(np.arange(400) / 7.0)  # the level swings; only the climb before day 330 is new
    >>> climb = np.clip(np.arange(400) - 310.0, 0.0, None) / 5.0
    >>> features = pd.DataFrame({"mean_correlation": wave + climb}, index=days)
    >>> table = change_study(features, events, horizons=[20])
    >>> table[["change_days", "hit_rate", "mean_lead_days"]].to_dict("list")
    {'change_days': [0, 20], 'hit_rate': [1.0, 1.0], 'mean_lead_days': [17.0, 17.0]}
    >>> table["auc"].round(2).tolist()  # the change ranks the windows before the event better
    [0.83, 0.88]
    """
    chosen = (
        list(columns)
        if columns is not None
        else [c for c in features.columns if c == "mean_correlation"] + topological_columns(list(features.columns))
    )
    missing = [c for c in chosen if c not in features.columns]
    if missing:
        raise ConfigError(
            f"change_study: columns {missing} are not in the features; available: {list(features.columns)}"
        )
    bad = [h for h in horizons if h < 1 or h % step]
    if bad:
        raise ConfigError(
            f"change_study: horizons {bad} are not positive multiples of step = {step}; "
            "a change compares two windows, which lie step trading days apart"
        )
    changes = summary_changes(features[chosen].astype(float), list(horizons), step).frame
    source = {name: (name, 0) for name in chosen} | {f"{n}_chg_{h}": (n, int(h)) for n in chosen for h in horizons}
    order = [c for name in chosen for c in (name, *(f"{name}_chg_{h}" for h in horizons))]
    table = study_table(
        pd.concat([features[chosen].astype(float), changes], axis=1),
        events,
        columns=order,
        directions={c: crisis_direction(source[c][0], directions) for c in order},
        horizon=horizon,
        lookback=lookback,
        trend=trend,
        post_event_days=post_event_days,
    )
    table.insert(0, "change_days", [source[c][1] for c in table.index])
    table.insert(0, "summary", [source[c][0] for c in table.index])
    return table
