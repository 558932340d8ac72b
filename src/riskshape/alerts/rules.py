"""Evaluate alert rules over the summaries series, strictly causally.

A rule (:class:`riskshape.config.RuleConfig`) watches one summary column. Its windows are taken
in order; what it decides at window ``t`` depends on the values at windows ``0 .. t`` only, so
appending windows, or changing values after ``t``, never changes a decision at or before ``t``.

Semantics, for a rule with ``direction="above"`` (``"below"`` mirrors every comparison):

1. **Levels.** The *history* of ``t`` is the non-missing values among the ``lookback`` windows
   strictly before ``t`` (``t`` itself is excluded, so a spike is compared with the past, not
   with itself). The threshold ``T_t`` and clear level ``C_t`` in force at ``t`` are in the
   summary's units. ``level``: the configured numbers. ``quantile`` and ``zscore``: computed
   from the history of ``t``; ``threshold`` and ``clear`` are a quantile in (0, 1) (numpy's
   linear method, Hyndman & Fan type 7) or a z-score (trailing mean + z * sample std, ``ddof=1``), converted
   to the summary's units afresh at each window. ``clear`` defaults to ``threshold``.
   See :mod:`riskshape.alerts.thresholds`.
2. **Missing values.** NaN and infinite values are missing: they never fire, never clear, do
   not enter any history, and break a run of consecutive windows.
3. **Minimum history.** Window ``t`` is *judged* only if its value is present, its history
   holds at least ``min_history`` values (and at least 1 for ``quantile``, 2 for ``zscore``),
   and ``T_t`` is defined. ``min_history`` never exceeds ``lookback`` (for every kind): a
   :class:`~riskshape.config.RuleConfig` refuses it when it is read.
4. **Beyond.** A judged window is beyond the threshold when ``x_t > T_t`` (strictly).
5. **Run.** ``run_t`` counts the judged-and-beyond windows in a row ending at ``t``; any other
   window (missing, not judged, or not beyond) resets it to 0.
6. **Hysteresis.** After a firing the rule is *active*. An active rule is cleared at the first
   later window with ``x_t <= C_t`` (value present, ``C_t`` defined), and only then may fire
   again. A clearing window is never beyond (``C_t <= T_t``), so the run restarts from it.
7. **Cool-down.** After a firing at window ``f``, windows ``f + 1 .. f + cooldown`` may not
   fire, even if the rule was cleared meanwhile; runs still build up during the cool-down.
8. **Firing.** The rule fires at ``t`` when ``run_t >= consecutive``, it is not active and
   ``t`` is not in a cool-down. The :class:`Firing` records ``x_t`` and ``T_t``.

Windows are positions in the series (its index labels them); the cool-down and the lookback
count windows, not calendar days.

**When a rule can fire.** By points 3 and 8 a rule is silent until it has judged ``consecutive``
windows, whatever the summary does: with ``min_history = 250`` and ``consecutive = 10`` that is
260 windows with a value. :class:`RuleState` says whether it can fire yet (``can_fire``), the
history it needs against the history it holds, and how many more windows it needs
(:func:`windows_until_ready`); the CLI's ``run`` and the service's ``latest`` show them.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from riskshape.alerts.model import Firing
from riskshape.alerts.thresholds import MIN_PAST_VALUES, RuleLevels, clean_values, trailing_levels
from riskshape.config import AlertsConfig, RuleConfig
from riskshape.errors import ConfigError, DataError
from riskshape.types import BoolArray, FloatArray, IntArray, Positions, Severity

__all__ = [
    "RuleState",
    "evaluate_rule",
    "evaluate_rules",
    "rule_state",
    "rule_states",
    "active_rules",
    "recheck_firing",
    "windows_until_ready",
]


@dataclass(frozen=True)
class RuleState:
    """Where one rule stands after a given window.

    Attributes
    ----------
    rule, summary : str
        Rule name and the summary column it watches.
    window_end : pandas.Timestamp
        The window this state is at (the last window evaluated).
    value : float
        The summary at that window (NaN if missing).
    threshold, clear_level : float
        Threshold and clear level in force at that window, in the summary's units (NaN where
        not yet defined).
    history : int
        Non-missing values in the ``lookback`` windows before it.
    run : int
        Consecutive judged windows beyond the threshold, ending at it.
    fired : bool
        Whether the rule fired at this very window.
    active : bool
        Whether the rule is active (fired and not yet cleared) after this window.
    active_since : pandas.Timestamp or None
        Window of the firing that made it active (None when not active).
    last_fired : pandas.Timestamp or None
        Window of its latest firing up to this window, active or not.
    cooldown_left : int
        Windows after this one during which it may not fire.
    severity : str
        The rule's severity.
    history_needed : int
        Values of history a window needs to be judged: ``min_history``, and at least 1 for
        ``quantile``, 2 for ``zscore`` (compare with ``history``, the history held).
    can_fire : bool
        Whether the rule has held enough history for ``consecutive`` judged windows, so that it
        can fire now (:func:`windows_until_ready`); a rule that cannot fire yet is silent
        whatever the summary does.
    windows_to_go : int
        Windows (each with a value) still needed before it can first fire; 0 when ``can_fire``.
        Times ``step`` it is trading days.
    """

    rule: str
    summary: str
    window_end: pd.Timestamp
    value: float
    threshold: float
    clear_level: float
    history: int
    run: int
    fired: bool
    active: bool
    active_since: pd.Timestamp | None
    last_fired: pd.Timestamp | None
    cooldown_left: int
    severity: Severity
    history_needed: int = 0
    can_fire: bool = True
    windows_to_go: int = 0


@dataclass(frozen=True)
class _Trace:
    """The state machine's output over a whole series (internal)."""

    values: FloatArray
    threshold: FloatArray
    clear: FloatArray
    history: IntArray
    fired: Positions  # positions where it fired
    run: int  # at the last window
    active_since: int | None  # position, after the last window
    last_fired: int | None
    history_needed: int
    n_judged: int  # windows judged so far
    next_history: int  # the history the window after the last one will hold


def _check_series(series: pd.Series, what: str) -> pd.Series:
    if not isinstance(series.index, pd.DatetimeIndex):
        raise DataError(
            f"{what}: the index must be the windows' end dates (a DatetimeIndex), got {type(series.index).__name__}"
        )
    if not series.index.is_monotonic_increasing or not series.index.is_unique:
        raise DataError(f"{what}: window_end dates must be unique and increasing; sort the features by window_end")
    try:
        return clean_values(series)
    except (TypeError, ValueError):
        raise DataError(f"{what}: values must be numbers, got dtype {series.dtype}") from None


def _stamp(index: pd.DatetimeIndex, position: int | None) -> pd.Timestamp | None:
    return None if position is None else pd.Timestamp(index[position])


@dataclass(frozen=True)
class _Decisions:
    """Per-window inputs of the state machine (module docstring, points 1-4)."""

    levels: RuleLevels
    values: FloatArray
    present: BoolArray
    judged: BoolArray
    beyond: BoolArray
    past_clear: BoolArray
    need: int


def _decisions(values: pd.Series, rule: RuleConfig, since: int = 0) -> _Decisions:
    """Which windows are judged, beyond the threshold, past the clear level (a cleaned series).

    Positions before ``since`` may be left unjudged (their z-score levels are not computed).
    """
    levels = trailing_levels(values, rule, since)
    x = values.to_numpy()
    need = max(rule.min_history, MIN_PAST_VALUES[rule.kind])
    sign = 1.0 if rule.direction == "above" else -1.0
    with np.errstate(invalid="ignore"):
        present = ~np.isnan(x)
        judged = present & (levels.history >= need) & ~np.isnan(levels.threshold)
        beyond = judged & (sign * x > sign * levels.threshold)
        past_clear = present & ~np.isnan(levels.clear) & (sign * x <= sign * levels.clear)
    return _Decisions(levels, x, present, judged, beyond, past_clear, need)


@dataclass(frozen=True)
class _Machine:
    """The state machine's state after a window (points 5-8): all a later window needs of the past."""

    run: int
    active_since: int | None  # position of the firing that made it active (may precede the series)
    last_fired: int | None  # position of the latest firing (may precede the series)


def _run_machine(
    beyond: BoolArray, past_clear: BoolArray, rule: RuleConfig, start: int, state: _Machine
) -> tuple[list[int], _Machine]:
    """Positions ``start ..`` through the state machine from ``state``: the firings and the state after."""
    fired: list[int] = []
    run, active_since, last_fired = state.run, state.active_since, state.last_fired
    for t in range(start, len(beyond)):
        if active_since is not None and past_clear[t]:
            active_since = None
        run = run + 1 if beyond[t] else 0
        cooling = last_fired is not None and t - last_fired <= rule.cooldown
        if run >= rule.consecutive and active_since is None and not cooling:
            fired.append(t)
            active_since = last_fired = t
    return fired, _Machine(run=run, active_since=active_since, last_fired=last_fired)


def _trace(values: pd.Series, rule: RuleConfig) -> _Trace:
    """Run the rule's state machine (module docstring, points 2-8) over a cleaned series."""
    d = _decisions(values, rule)
    fired, end = _run_machine(d.beyond, d.past_clear, rule, 0, _Machine(run=0, active_since=None, last_fired=None))
    return _Trace(
        values=d.values,
        threshold=d.levels.threshold,
        clear=d.levels.clear,
        history=d.levels.history,
        fired=np.asarray(fired, dtype=np.int64),
        run=end.run,
        active_since=end.active_since,
        last_fired=end.last_fired,
        history_needed=d.need,
        n_judged=int(np.count_nonzero(d.judged)),
        next_history=int(np.count_nonzero(d.present[-rule.lookback :])),
    )


def windows_until_ready(history_held: int, history_needed: int, judged: int, consecutive: int) -> int:
    """Windows (each with a value) before a rule can first fire; 0 when it can fire now.

    A rule fires at the earliest at its ``consecutive``-th judged window, and a window is judged
    once its history holds ``history_needed`` values. With ``judged`` windows judged so far and
    ``history_held`` values of history for the next window: 0 when ``judged >= consecutive``;
    ``consecutive - judged`` when the next window will be judged; else
    ``history_needed - history_held + consecutive``.

    Parameters
    ----------
    history_held : int
        Non-missing values among the ``lookback`` windows up to and including the last one.
    history_needed : int
        ``RuleState.history_needed``.
    judged : int
        Windows judged so far.
    consecutive : int
        The rule's ``consecutive``.

    Returns
    -------
    int

    Examples
    --------
    >>> windows_until_ready(history_held=100, history_needed=250, judged=0, consecutive=10)
    160
    >>> windows_until_ready(history_held=250, history_needed=250, judged=3, consecutive=10)
    7
    >>> windows_until_ready(history_held=250, history_needed=250, judged=40, consecutive=10)
    0
    """
    if judged >= consecutive:
        return 0
    if history_held >= history_needed:
        return consecutive - judged
    return history_needed - history_held + consecutive


def _firing(rule: RuleConfig, index: pd.DatetimeIndex, trace: _Trace, t: int) -> Firing:
    return Firing(
        rule=rule.name,
        summary=rule.summary,
        kind=rule.kind,
        window_end=pd.Timestamp(index[t]),
        value=float(trace.values[t]),
        threshold=float(trace.threshold[t]),
        severity=rule.severity,
    )


def evaluate_rule(series: pd.Series, rule: RuleConfig) -> list[Firing]:
    """Every firing of one rule over one summary series.

    Parameters
    ----------
    series : pandas.Series
        The summary ``rule.summary``, indexed by ``window_end`` (increasing DatetimeIndex).
    rule : RuleConfig
        The rule (semantics in the module docstring).

    Returns
    -------
    list of Firing
        In window order.

    Raises
    ------
    DataError
        If the index is not increasing window_end dates or the values are not numbers.

    Examples
    --------
    >>> import pandas as pd
    >>> s = pd.Series([1.0, 5.0, 3.5, 6.0], index=pd.date_range("2024-01-01", periods=4))
    >>> rule = RuleConfig(name="high", summary="x", kind="level", threshold=4.0, clear=3.0, min_history=0)
    >>> [f.window_end.day for f in evaluate_rule(s, rule)]  # 3.5 does not clear, so 6.0 cannot fire
    [2]
    """
    values = _check_series(series, f"summary '{rule.summary}' (rule '{rule.name}')")
    trace = _trace(values, rule)
    return [_firing(rule, values.index, trace, int(t)) for t in trace.fired]


def _summary_column(features: pd.DataFrame, rule: RuleConfig) -> pd.Series:
    if rule.summary not in features.columns:
        available = ", ".join(map(str, features.columns))
        raise ConfigError(
            f"alerts rule '{rule.name}': summary '{rule.summary}' is not a features column; "
            f"available columns: {available}"
        )
    return features[rule.summary]


def _check_names(rules: Sequence[RuleConfig]) -> None:
    """Rules gathered in code, outside a configuration, get the configuration's one check of their names."""
    AlertsConfig(rules=tuple(rules))


def evaluate_rules(features: pd.DataFrame, rules: Sequence[RuleConfig]) -> list[Firing]:
    """Every firing of every rule over a features table.

    Parameters
    ----------
    features : pandas.DataFrame
        ``MonitorResult.features``: one row per window, indexed by ``window_end``.
    rules : sequence of RuleConfig
        Typically ``config.alerts.rules``; names must be unique.

    Returns
    -------
    list of Firing
        Sorted by ``(window_end, rule)``.

    Raises
    ------
    ConfigError
        If a rule names a summary that is not a column (the message lists the columns), or two
        rules share a name.
    DataError
        If the index is not increasing window_end dates or a watched column is not numeric.
    """
    _check_names(rules)
    firings: list[Firing] = []
    for rule in rules:
        firings.extend(evaluate_rule(_summary_column(features, rule), rule))
    return sorted(firings, key=lambda f: (f.window_end, f.rule))


def rule_state(series: pd.Series, rule: RuleConfig) -> RuleState:
    """Where one rule stands after the last window of ``series``.

    Parameters
    ----------
    series : pandas.Series
        The summary, indexed by ``window_end``; must hold at least one window.
    rule : RuleConfig

    Returns
    -------
    RuleState

    Raises
    ------
    DataError
        If the series is empty or badly indexed.
    """
    what = f"summary '{rule.summary}' (rule '{rule.name}')"
    values = _check_series(series, what)
    if values.empty:
        raise DataError(f"{what}: no windows to evaluate")
    trace = _trace(values, rule)
    last = len(values) - 1
    cooldown_left = 0 if trace.last_fired is None else max(0, rule.cooldown - (last - trace.last_fired))
    return RuleState(
        rule=rule.name,
        summary=rule.summary,
        window_end=pd.Timestamp(values.index[last]),
        value=float(trace.values[last]),
        threshold=float(trace.threshold[last]),
        clear_level=float(trace.clear[last]),
        history=int(trace.history[last]),
        run=trace.run,
        fired=trace.last_fired == last,
        active=trace.active_since is not None,
        active_since=_stamp(values.index, trace.active_since),
        last_fired=_stamp(values.index, trace.last_fired),
        cooldown_left=cooldown_left,
        severity=rule.severity,
        history_needed=trace.history_needed,
        can_fire=trace.n_judged >= rule.consecutive,
        windows_to_go=windows_until_ready(trace.next_history, trace.history_needed, trace.n_judged, rule.consecutive),
    )


def rule_states(features: pd.DataFrame, rules: Sequence[RuleConfig]) -> tuple[RuleState, ...]:
    """The state of every rule after the last window of ``features``, in the rules' order.

    Parameters
    ----------
    features : pandas.DataFrame
        One row per window, indexed by ``window_end``; at least one row.
    rules : sequence of RuleConfig

    Returns
    -------
    tuple of RuleState

    Raises
    ------
    ConfigError, DataError
        As :func:`evaluate_rules`; DataError also if ``features`` is empty.
    """
    _check_names(rules)
    return tuple(rule_state(_summary_column(features, rule), rule) for rule in rules)


def active_rules(features: pd.DataFrame, rules: Sequence[RuleConfig]) -> tuple[RuleState, ...]:
    """The rules that are active (fired, not yet cleared) at the last window of ``features``.

    Parameters
    ----------
    features : pandas.DataFrame
    rules : sequence of RuleConfig

    Returns
    -------
    tuple of RuleState
        Only those with ``active`` true, in the rules' order.
    """
    return tuple(state for state in rule_states(features, rules) if state.active)


def recheck_firing(features: pd.DataFrame, rule: RuleConfig, window_end: pd.Timestamp | str) -> Firing | None:
    """Recompute one rule's decision at one window, from the windows up to and including it.

    Only the rows of ``features`` up to ``window_end`` are read, so this is also a check of
    causality: for any window where :func:`evaluate_rules` fired, it returns an equal Firing.

    Parameters
    ----------
    features : pandas.DataFrame
        One row per window, indexed by ``window_end`` (later rows may be present; they are ignored).
    rule : RuleConfig
    window_end : pandas.Timestamp or str
        The window to decide at; must be a row of ``features``.

    Returns
    -------
    Firing or None
        The firing at ``window_end``, or None if the rule does not fire there.

    Raises
    ------
    DataError
        If ``window_end`` is not a window of ``features`` (or the index is bad).
    ConfigError
        If the rule's summary is not a column.
    """
    series = _summary_column(features, rule)
    what = f"summary '{rule.summary}' (rule '{rule.name}')"
    values = _check_series(series, what)
    try:
        stamp = pd.Timestamp(window_end)
    except (TypeError, ValueError):
        raise DataError(f"window_end {window_end!r} is not a date; use YYYY-MM-DD") from None
    if stamp not in values.index:
        raise DataError(f"{what}: window_end {stamp.date()} is not one of the {len(values)} windows of the features")
    state = rule_state(series.loc[:stamp], rule)
    if not state.fired:
        return None
    return Firing(
        rule=rule.name,
        summary=rule.summary,
        kind=rule.kind,
        window_end=state.window_end,
        value=state.value,
        threshold=state.threshold,
        severity=rule.severity,
    )
