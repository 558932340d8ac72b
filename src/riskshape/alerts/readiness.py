"""Whether each alert rule can fire yet, in words: history needed against history held.

A rule is silent until it has judged ``consecutive`` windows (:mod:`riskshape.alerts.rules`,
points 3 and 8), so on a short history a rule may not be able to fire at all. The CLI prints
these lines after a run; the service returns the same numbers in ``latest``.
"""

from __future__ import annotations

from collections.abc import Sequence

import pandas as pd

from riskshape.alerts.rules import RuleState, rule_states
from riskshape.config import RuleConfig

__all__ = ["describe_readiness", "readiness_lines"]


def describe_readiness(state: RuleState, step: int = 1) -> str:
    """One line: whether the rule can fire yet, and when it will.

    Parameters
    ----------
    state : RuleState
        The rule's state at the last window (:func:`riskshape.alerts.rules.rule_state`).
    step : int
        Trading days between windows (the configuration's ``step``).

    Returns
    -------
    str

    Examples
    --------
    >>> import pandas as pd
    >>> from riskshape.alerts.rules import rule_state
    >>> rule = RuleConfig(name="q", summary="x", kind="quantile", threshold=0.99, lookback=300, min_history=250)
    >>> series = pd.Series(range(100), index=pd.bdate_range("2031-01-01", periods=100), dtype=float)
    >>> describe_readiness(rule_state(series, rule))
    'q: cannot fire yet: history 99 of 250 windows needed; can fire after 151 more windows (about 151 trading days)'
    """
    if state.can_fire:
        return f"{state.rule}: can fire (history {state.history}, {state.history_needed} needed)"
    return (
        f"{state.rule}: cannot fire yet: history {state.history} of {state.history_needed} windows needed; "
        f"can fire after {state.windows_to_go} more windows (about {state.windows_to_go * step} trading days)"
    )


def readiness_lines(features: pd.DataFrame, rules: Sequence[RuleConfig], step: int = 1) -> list[str]:
    """:func:`describe_readiness` for each rule whose summary is a column of ``features``.

    Parameters
    ----------
    features : pandas.DataFrame
        ``MonitorResult.features`` (at least one window).
    rules : sequence of RuleConfig
        Typically ``config.alerts.rules``.
    step : int
        The configuration's ``step``.

    Returns
    -------
    list of str
        One line per rule, in the rules' order (none without windows).

    Examples
    --------
    >>> import pandas as pd
    >>> rule = RuleConfig(name="lvl", summary="x", kind="level", threshold=1.0, min_history=0)
    >>> readiness_lines(pd.DataFrame({"x": [0.5]}, index=pd.bdate_range("2031-01-01", periods=1)), [rule])
    ['lvl: can fire (history 0, 0 needed)']
    """
    if features.empty:
        return []
    watched = [rule for rule in rules if rule.summary in features.columns]
    return [describe_readiness(state, step) for state in rule_states(features, watched)]
