"""The rules' carry: judging new windows from a saved carry and the ``lookback`` rows before them gives exactly
the firings of ``evaluate_rules`` over the whole series, however the series is cut.

The reference is :func:`riskshape.alerts.evaluate_rules` over the whole series (the batch path) and
:func:`riskshape.alerts.rule_state` (where each rule stands after the last window); the cut points,
series and rule configurations are drawn by hypothesis. Equality is exact (``==`` on the firings,
their values and thresholds included).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from riskshape.alerts import (
    RulesCarry,
    advance_rules,
    carry_rules,
    evaluate_rules,
    lookback_needed,
    rule_state,
)
from riskshape.config import RuleConfig
from riskshape.errors import ConfigError, DataError


@st.composite
def rules_and_series(draw: st.DrawFn) -> tuple[list[RuleConfig], pd.DataFrame]:
    n = draw(st.integers(1, 90))
    raw = draw(
        st.lists(
            st.one_of(
                st.floats(-3, 3, allow_nan=False, width=64),
                st.sampled_from([np.nan, np.inf, 0.0, 1.0]),
            ),
            min_size=n,
            max_size=n,
        )
    )
    other = np.asarray(draw(st.lists(st.floats(0, 10, allow_nan=False), min_size=n, max_size=n)))
    features = pd.DataFrame(
        {"x": np.asarray(raw, dtype=float), "y": other},
        index=pd.bdate_range("2031-01-06", periods=n, name="window_end"),
    )
    rules: list[RuleConfig] = []
    for i in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(["level", "quantile", "zscore"]))
        direction = draw(st.sampled_from(["above", "below"]))
        lookback = draw(st.integers(2, 25))
        if kind == "quantile":
            threshold = draw(st.floats(0.05, 0.95))
            clear = draw(st.one_of(st.none(), st.floats(0.05, 0.95)))
        else:
            threshold = draw(st.floats(-2, 2))
            clear = draw(st.one_of(st.none(), st.floats(-2, 2)))
        try:
            rules.append(
                RuleConfig(
                    name=f"r{i}",
                    summary=draw(st.sampled_from(["x", "y"])),
                    kind=kind,
                    threshold=threshold,
                    clear=clear,
                    direction=direction,
                    lookback=lookback,
                    min_history=draw(st.integers(0, lookback)),
                    consecutive=draw(st.integers(1, 4)),
                    cooldown=draw(st.integers(0, 6)),
                )
            )
        except ConfigError:
            assume(False)
    return rules, features


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(case=rules_and_series(), data=st.data())
def test_advancing_in_pieces_gives_the_firings_of_the_whole_series(
    case: tuple[list[RuleConfig], pd.DataFrame], data: st.DataObject
) -> None:
    rules, features = case
    n = len(features)
    cuts = sorted(set(data.draw(st.lists(st.integers(0, n), max_size=5))) | {0, n})
    carry = carry_rules(features.iloc[:0], rules)
    firings = []
    for lo, hi in zip(cuts, cuts[1:]):
        # only the rows the carry needs before the new ones: the longest lookback
        past = features.iloc[max(0, lo - lookback_needed(rules)) : lo]
        # the carry goes through its plain-data form, as the archive keeps it
        carry = RulesCarry.from_data(carry.to_data())
        fired, carry = advance_rules(carry, past, features.iloc[lo:hi], rules)
        firings += fired
    assert firings == evaluate_rules(features, rules)
    assert carry == carry_rules(features, rules)
    assert carry.windows == n
    for rule, kept in zip(rules, carry.rules):
        state = rule_state(features[rule.summary], rule)  # the reference: where the rule stands at the end
        assert kept.run == state.run
        assert kept.active == state.active
        assert (kept.since_fired is None) == (state.last_fired is None)
        if kept.since_fired is not None:
            assert features.index[n - 1 - kept.since_fired] == state.last_fired
            assert max(0, rule.cooldown - kept.since_fired) == state.cooldown_left
        assert state.can_fire == (kept.judged >= rule.consecutive)


def test_a_carry_for_other_rules_or_too_few_past_rows_is_refused() -> None:
    features = pd.DataFrame({"x": np.arange(30.0)}, index=pd.bdate_range("2031-01-06", periods=30))
    rule = RuleConfig(name="q", summary="x", kind="quantile", threshold=0.9, lookback=10, min_history=5)
    carry = carry_rules(features.iloc[:20], [rule])
    with pytest.raises(DataError, match="10 needed"):
        advance_rules(carry, features.iloc[15:20], features.iloc[20:], [rule])
    other = RuleConfig(name="other", summary="x", kind="quantile", threshold=0.9, lookback=10, min_history=5)
    with pytest.raises(DataError, match="rebuild it with carry_rules"):
        advance_rules(carry, features.iloc[10:20], features.iloc[20:], [other])


def test_a_rising_series_fires_a_quantile_rule_once_per_cooldown() -> None:
    # worked by hand: a strictly rising series is above every trailing quantile at each judged
    # window (min_history 3: from window 3 on); consecutive 1, never cleared (the clear level
    # stays below each value), so it fires once, at window 3, and stays active.
    features = pd.DataFrame({"x": np.arange(12.0)}, index=pd.bdate_range("2031-01-06", periods=12))
    rule = RuleConfig(name="q", summary="x", kind="quantile", threshold=0.5, lookback=5, min_history=3)
    carry = carry_rules(features.iloc[:6], [rule])
    fired, after = advance_rules(carry, features.iloc[1:6], features.iloc[6:], [rule])
    assert fired == []
    assert [f.window_end for f in evaluate_rules(features, [rule])] == [features.index[3]]
    assert after.rules[0].active and after.rules[0].since_fired == 8
