"""Property tests: rules never look ahead, and recheck_firing agrees with the batch evaluation.

Causality is the definition in the issue ("an alert at window t uses summaries up to t only"):
changing any value after t (or dropping or adding windows after it) must leave every firing at
or before t unchanged.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from riskshape.alerts.rules import evaluate_rule, evaluate_rules, recheck_firing
from riskshape.config import RuleConfig

_values = st.one_of(
    st.floats(min_value=-100.0, max_value=100.0, allow_nan=False, allow_infinity=False),
    st.just(math.nan),
)


@st.composite
def rules(draw: st.DrawFn) -> RuleConfig:
    kind = draw(st.sampled_from(["level", "quantile", "zscore"]))
    direction = draw(st.sampled_from(["above", "below"]))
    if kind == "quantile":
        threshold = draw(st.floats(0.05, 0.95))
        clear = draw(st.one_of(st.none(), st.floats(0.01, threshold)))
        if direction == "below" and clear is not None:
            clear = draw(st.floats(threshold, 0.99))
    else:
        threshold = draw(st.floats(-3.0, 3.0))
        gap = draw(st.one_of(st.none(), st.floats(0.0, 3.0)))
        clear = None if gap is None else (threshold - gap if direction == "above" else threshold + gap)
    lookback = draw(st.integers(2, 12))
    return RuleConfig(
        name="r",
        summary="x",
        kind=kind,
        threshold=threshold,
        clear=clear,
        direction=direction,
        lookback=lookback,
        min_history=draw(st.integers(0, lookback)),
        consecutive=draw(st.integers(1, 3)),
        cooldown=draw(st.integers(0, 4)),
    )


def _series(values: list[float]) -> pd.Series:
    return pd.Series(values, index=pd.date_range("2024-01-01", periods=len(values), freq="B"), dtype=float)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    values=st.lists(_values, min_size=1, max_size=40),
    rule=rules(),
    cut=st.integers(0, 39),
    tail=st.lists(_values, min_size=0, max_size=40),
)
def test_rules_never_look_ahead(values: list[float], rule: RuleConfig, cut: int, tail: list[float]) -> None:
    t = min(cut, len(values) - 1)
    original = _series(values)
    # replace everything after t (and possibly change the length) by arbitrary values
    perturbed = _series(values[: t + 1] + tail)
    upto = original.index[t]
    before = [f for f in evaluate_rule(original, rule) if f.window_end <= upto]
    after = [f for f in evaluate_rule(perturbed, rule) if f.window_end <= upto]
    assert before == after


@settings(max_examples=150, deadline=None)
@given(values=st.lists(_values, min_size=1, max_size=30), rule=rules())
def test_recheck_agrees_with_batch_on_every_window(values: list[float], rule: RuleConfig) -> None:
    features = _series(values).to_frame("x")
    batch = {f.window_end: f for f in evaluate_rules(features, [rule])}
    for when in features.index:
        assert recheck_firing(features, rule, when) == batch.get(when)


def test_recheck_agrees_with_batch_on_long_random_series() -> None:
    rng = np.random.default_rng(99)
    walk = np.cumsum(rng.standard_normal(600))
    walk[rng.random(600) < 0.05] = np.nan
    features = _series(list(walk)).to_frame("x")
    rule = RuleConfig(name="r", summary="x", kind="zscore", threshold=1.5, clear=0.0, lookback=60, min_history=30)
    firings = evaluate_rules(features, [rule])
    assert len(firings) >= 3  # a random walk leaves its trailing band now and then
    for firing in firings:
        assert recheck_firing(features, rule, firing.window_end) == firing
