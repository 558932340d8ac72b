"""What the alert rules carry from one window to the next, so that new windows are judged without the series.

:func:`riskshape.alerts.rules.evaluate_rules` runs each rule's state machine over the whole
features series. What a window decides depends on the series before it in two ways only:

* its **levels** (threshold, clear level, history held) come from the ``lookback`` windows
  before it (:mod:`riskshape.alerts.thresholds`, computed from those windows alone);
* the **state machine** (the run of consecutive windows beyond the threshold, whether the rule is
  active after a firing, how long ago it last fired for the cool-down) is carried across windows.

A :class:`RulesCarry` holds the second for every rule, as of the last window judged, plus how
many windows that was. :func:`advance_rules` takes it, the ``lookback`` feature rows before the
new windows (:func:`lookback_needed` of them) and the new rows, and gives exactly the firings
:func:`~riskshape.alerts.rules.evaluate_rules` gives at the new windows over the whole series,
with the carry after them. :func:`carry_rules` makes the carry from a whole series (a first run,
or after a correction changed windows in the middle).

The carry is plain data (:meth:`RulesCarry.to_data` / :meth:`RulesCarry.from_data`), so the
daily loop keeps it in the archive (:mod:`riskshape.daily.tail_run`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import date

import pandas as pd

from riskshape.alerts.model import Firing
from riskshape.alerts.rules import (
    _check_names,
    _check_series,
    _decisions,
    _Machine,
    _run_machine,
    _summary_column,
)
from riskshape.config import RuleConfig
from riskshape.errors import DataError

__all__ = ["RuleCarry", "RulesCarry", "carry_rules", "advance_rules", "lookback_needed"]


@dataclass(frozen=True)
class RuleCarry:
    """One rule's state machine after the last window judged.

    Attributes
    ----------
    rule : str
        The rule's name.
    run : int
        Consecutive judged windows beyond the threshold, ending at the last window.
    active : bool
        Fired and not yet cleared.
    since_fired : int or None
        Windows from its latest firing to the last window (0: it fired there); None if it never fired.
    judged : int
        Windows judged so far.
    """

    rule: str
    run: int
    active: bool
    since_fired: int | None
    judged: int


@dataclass(frozen=True)
class RulesCarry:
    """Every rule's :class:`RuleCarry` after the first ``windows`` windows of a series.

    Attributes
    ----------
    windows : int
        Windows judged (the series' length so far).
    window_end : datetime.date or None
        The last of them (None before any).
    rules : tuple of RuleCarry
        In the rules' order.
    """

    windows: int
    window_end: date | None
    rules: tuple[RuleCarry, ...]

    def to_data(self) -> dict[str, object]:
        """Plain JSON data (for the archive).

        Returns
        -------
        dict
            ``windows``, ``window_end`` (ISO date or None) and ``rules`` (one object per rule).
        """
        return {
            "windows": self.windows,
            "window_end": None if self.window_end is None else self.window_end.isoformat(),
            "rules": [
                {"rule": r.rule, "run": r.run, "active": r.active, "since_fired": r.since_fired, "judged": r.judged}
                for r in self.rules
            ],
        }

    @classmethod
    def from_data(cls, data: Mapping[str, object]) -> RulesCarry:
        """The carry written by :meth:`to_data`.

        Parameters
        ----------
        data : mapping
            As :meth:`to_data` wrote it.

        Returns
        -------
        RulesCarry

        Raises
        ------
        DataError
            If a field is missing or of the wrong type.
        """
        try:
            end = data["window_end"]
            rules = data["rules"]
            assert isinstance(rules, list)
            return cls(
                windows=int(str(data["windows"])),
                window_end=None if end is None else date.fromisoformat(str(end)),
                rules=tuple(
                    RuleCarry(
                        rule=str(r["rule"]),
                        run=int(r["run"]),
                        active=bool(r["active"]),
                        since_fired=None if r["since_fired"] is None else int(r["since_fired"]),
                        judged=int(r["judged"]),
                    )
                    for r in rules
                ),
            )
        except (KeyError, TypeError, ValueError, AssertionError) as err:
            raise DataError(f"rule carry: not as written by RulesCarry.to_data ({err!r})") from None


def lookback_needed(rules: Sequence[RuleConfig]) -> int:
    """Feature rows before the new windows that :func:`advance_rules` needs: the longest ``lookback``.

    Parameters
    ----------
    rules : sequence of RuleConfig

    Returns
    -------
    int

    Examples
    --------
    >>> from riskshape.config import RuleConfig
    >>> a = RuleConfig(name="a", summary="x", kind="zscore", threshold=2.0, lookback=20, min_history=5)
    >>> b = RuleConfig(name="b", summary="x", kind="level", threshold=1.0, lookback=40, min_history=0)
    >>> lookback_needed([a, b])
    40
    """
    return max((rule.lookback for rule in rules), default=0)


def _carry_of(rule: RuleConfig, machine: _Machine, last: int, judged: int) -> RuleCarry:
    return RuleCarry(
        rule=rule.name,
        run=machine.run,
        active=machine.active_since is not None,
        since_fired=None if machine.last_fired is None else last - machine.last_fired,
        judged=judged,
    )


def _firing(rule: RuleConfig, index: pd.DatetimeIndex, values: object, threshold: object, t: int) -> Firing:
    return Firing(
        rule=rule.name,
        summary=rule.summary,
        kind=rule.kind,
        window_end=pd.Timestamp(index[t]),
        value=float(values[t]),  # type: ignore[index]
        threshold=float(threshold[t]),  # type: ignore[index]
        severity=rule.severity,
    )


def carry_rules(features: pd.DataFrame, rules: Sequence[RuleConfig]) -> RulesCarry:
    """The rules' carry after the last window of a whole series.

    Parameters
    ----------
    features : pandas.DataFrame
        One row per window from the first, indexed by ``window_end`` (may be empty).
    rules : sequence of RuleConfig

    Returns
    -------
    RulesCarry

    Raises
    ------
    ConfigError, DataError
        As :func:`riskshape.alerts.rules.evaluate_rules`.
    """
    empty = RulesCarry(windows=0, window_end=None, rules=tuple(RuleCarry(r.name, 0, False, None, 0) for r in rules))
    return advance_rules(empty, features.iloc[:0], features, rules)[1]


def advance_rules(
    carry: RulesCarry, past: pd.DataFrame, new: pd.DataFrame, rules: Sequence[RuleConfig]
) -> tuple[list[Firing], RulesCarry]:
    """Judge new windows from the carry and the feature rows before them.

    Parameters
    ----------
    carry : RulesCarry
        After the window just before the first new one.
    past : pandas.DataFrame
        The feature rows of the windows just before the new ones: the last
        ``min(lookback_needed(rules), carry.windows)`` of them (more are ignored).
    new : pandas.DataFrame
        The new windows' feature rows, indexed by ``window_end``, after ``past``.
    rules : sequence of RuleConfig
        The rules the carry was made with, in the same order.

    Returns
    -------
    firings, carry : list of Firing, RulesCarry
        The firings at the new windows, sorted by ``(window_end, rule)`` (equal to those of
        :func:`~riskshape.alerts.rules.evaluate_rules` over the whole series there), and the carry
        after the last new window.

    Raises
    ------
    DataError
        If the carry is not of these rules, ``past`` is too short, or the windows are not in order.
    ConfigError
        If a rule's summary is not a column.
    """
    _check_names(rules)
    if [r.rule for r in carry.rules] != [r.name for r in rules]:
        raise DataError(
            f"rule carry: made for rules {[r.rule for r in carry.rules]}, given {[r.name for r in rules]}; "
            "rebuild it with carry_rules over the whole series"
        )
    needed = min(lookback_needed(rules), carry.windows)
    if len(past) < needed:
        raise DataError(
            f"rule carry: {len(past)} feature row(s) before the new windows, {needed} needed "
            "(the longest lookback, or every window before them)"
        )
    past = past.iloc[len(past) - needed :] if needed else past.iloc[:0]
    if not len(new):
        return [], carry
    firings: list[Firing] = []
    carried: list[RuleCarry] = []
    for rule, before in zip(rules, carry.rules):
        prefix = past.iloc[len(past) - min(rule.lookback, len(past)) :] if rule.lookback else past.iloc[:0]
        column = pd.concat([_summary_column(prefix, rule), _summary_column(new, rule)])
        values = _check_series(column, f"summary '{rule.summary}' (rule '{rule.name}')")
        start = len(prefix)
        decisions = _decisions(values, rule, since=start)  # only the new windows are judged
        last_before = start - 1
        machine = _Machine(
            run=before.run,
            active_since=last_before if before.active else None,  # only whether it is active matters
            last_fired=None if before.since_fired is None else last_before - before.since_fired,
        )
        fired, after = _run_machine(decisions.beyond, decisions.past_clear, rule, start, machine)
        firings += [_firing(rule, values.index, decisions.values, decisions.levels.threshold, t) for t in fired]
        judged = before.judged + int(decisions.judged[start:].sum())
        carried.append(_carry_of(rule, after, len(values) - 1, judged))
    end = pd.Timestamp(new.index[-1]).date()
    out = RulesCarry(windows=carry.windows + len(new), window_end=end, rules=tuple(carried))
    return sorted(firings, key=lambda f: (f.window_end, f.rule)), out
