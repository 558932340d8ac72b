"""A published anchor to read the evidence against, and a plain verdict per measure.

The anchor is a causal alert rule on persistence landscape norms of four US equity indices, as
quoted in riskshape's issue 18: F1 about 0.50, a mean lead of about 34 trading days, 2 of 4 crises
anticipated (MDPI Computers 14(10):408, 2025; the figures are the issue's, not re-derived here,
and the paper gives no intervals for them). Its data, events and horizon differ from any table
riskshape makes, so the comparison is context, not a contest on the same data.

:func:`compare_with_anchor` says, per row and measure, **better**, **worse** or **cannot tell**:
better when the whole confidence interval lies on the better side of the anchor (higher F1, hit
rate and lead), worse when it lies wholly on the other, cannot tell when the interval holds the
anchor (the anchor has no interval of its own, so it is taken as a point). A lead time cannot
exceed the study's horizon (a hit is an alert within ``horizon`` days before the start), so with a
horizon below the anchor's lead the verdict on lead is **out of reach**; a NaN interval (no
estimate, or too few events for one: ``evidence_table``'s ``min_events``) gives **no interval**.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = ["PublishedAnchor", "PUBLISHED_ANCHOR", "compare_with_anchor"]


@dataclass(frozen=True)
class PublishedAnchor:
    """Published figures of an early-warning rule.

    Attributes
    ----------
    f1 : float
    mean_lead_days : float
    hits, events : int
        Crises anticipated, of crises studied.
    source : str
    """

    f1: float
    mean_lead_days: float
    hits: int
    events: int
    source: str

    @property
    def hit_rate(self) -> float:
        """``hits / events``."""
        return self.hits / self.events


PUBLISHED_ANCHOR = PublishedAnchor(
    f1=0.50,
    mean_lead_days=34.0,
    hits=2,
    events=4,
    source="causal rule on landscape norms, MDPI Computers 14(10):408, 2025 (figures as quoted in riskshape issue 18)",
)


def _verdict(low: float, high: float, anchor: float) -> str:
    if not (np.isfinite(low) and np.isfinite(high)):
        return "no interval"
    if low > anchor:
        return "better"
    if high < anchor:
        return "worse"
    return "cannot tell"


def compare_with_anchor(table: pd.DataFrame, anchor: PublishedAnchor = PUBLISHED_ANCHOR) -> pd.DataFrame:
    """Better, worse or cannot tell, per row of an evidence table, on F1, hit rate and lead.

    Parameters
    ----------
    table : pandas.DataFrame
        From :func:`riskshape.research.evidence.evidence_table` (columns ``f1_low``, ``f1_high``,
        ``hit_rate_low``, ``hit_rate_high``, ``mean_lead_days_low``, ``mean_lead_days_high``,
        ``horizon``).
    anchor : PublishedAnchor
        Default :data:`PUBLISHED_ANCHOR`.

    Returns
    -------
    pandas.DataFrame
        Indexed like ``table``: ``f1``, ``hit_rate``, ``mean_lead_days``, each a verdict.

    Examples
    --------
    >>> import pandas as pd
    >>> table = pd.DataFrame(
    ...     {"f1_low": [0.6, 0.1], "f1_high": [0.8, 0.7], "hit_rate_low": [0.1, 0.0], "hit_rate_high": [0.3, 0.2],
    ...      "mean_lead_days_low": [10.0, 40.0], "mean_lead_days_high": [20.0, 50.0], "horizon": [20, 60]},
    ...     index=["a", "b"],
    ... )
    >>> compare_with_anchor(table).to_dict("index")["a"]
    {'f1': 'better', 'hit_rate': 'worse', 'mean_lead_days': 'out of reach'}
    >>> compare_with_anchor(table).to_dict("index")["b"]
    {'f1': 'cannot tell', 'hit_rate': 'worse', 'mean_lead_days': 'better'}
    """
    rows = []
    for _, row in table.iterrows():
        lead = (
            "out of reach"
            if float(row["horizon"]) < anchor.mean_lead_days
            else _verdict(row["mean_lead_days_low"], row["mean_lead_days_high"], anchor.mean_lead_days)
        )
        rows.append(
            {
                "f1": _verdict(row["f1_low"], row["f1_high"], anchor.f1),
                "hit_rate": _verdict(row["hit_rate_low"], row["hit_rate_high"], anchor.hit_rate),
                "mean_lead_days": lead,
            }
        )
    return pd.DataFrame(rows, index=table.index, columns=["f1", "hit_rate", "mean_lead_days"])
