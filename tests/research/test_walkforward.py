"""Walk-forward comparison: no future data reaches a prediction, and an informative feature wins.

Synthetic market: a wealth path with a 26 % crash every 250 days, a ``precursor`` feature that
rises in the 20 days before each crash (a known signal, planted here) and a ``noise`` feature.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from riskshape.errors import ConfigError, ResearchWarning
from riskshape.research.walkforward import nested_feature_sets, walk_forward

N_DAYS, CRASH_EVERY, CRASH_DAYS, LEAD = 1500, 250, 10, 20
MODELS = {"noise": ["noise"], "noise+precursor": ["noise", "precursor"]}
OPTIONS = dict(min_depth=0.15, max_duration=60, horizon=LEAD, n_folds=4, min_train=400, post_event_days=20)


def _market(seed: int) -> tuple[pd.DataFrame, pd.Series]:
    rng = np.random.default_rng(seed)
    days = pd.bdate_range("2030-01-01", periods=N_DAYS)
    returns = 0.0005 + 0.004 * rng.standard_normal(N_DAYS)
    precursor = rng.standard_normal(N_DAYS)
    for start in range(CRASH_EVERY, N_DAYS - CRASH_DAYS, CRASH_EVERY):
        returns[start + 1 : start + 1 + CRASH_DAYS] = -0.03
        precursor[start - LEAD + 1 : start + 1] += 2.5
    wealth = pd.Series(np.cumprod(1 + returns), index=days)
    features = pd.DataFrame({"noise": rng.standard_normal(N_DAYS), "precursor": precursor}, index=days).iloc[60:]
    return features, wealth


FEATURES, WEALTH = _market(3)


def test_an_informative_feature_beats_noise_out_of_sample() -> None:
    result = walk_forward(FEATURES, WEALTH, MODELS, **OPTIONS)
    table = result.table()
    assert table.loc["noise+precursor", "pooled_auc"] > 0.85
    assert abs(table.loc["noise", "pooled_auc"] - 0.5) < 0.15
    assert table.loc["noise+precursor", "pooled_brier"] < table.loc["noise", "pooled_brier"]
    assert list(result.folds["fold"]) == [0, 1, 2, 3]
    # each fold is trained only on what was known when it starts
    assert (result.folds["trained_until"] == result.folds["test_start"]).all()


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(cut=st.integers(min_value=500, max_value=N_DAYS - 30), seed=st.integers(0, 2**32 - 1))
def test_perturbing_the_future_leaves_earlier_predictions_unchanged(cut: int, seed: int) -> None:
    rng = np.random.default_rng(seed)
    cutoff = WEALTH.index[cut]
    wealth = WEALTH.copy()
    later = wealth.index > cutoff
    wealth[later] = wealth[later] * np.exp(np.cumsum(rng.normal(-0.01, 0.05, later.sum())))  # new crashes or not
    features = FEATURES.copy()
    future = features.index > cutoff
    features.loc[future] = rng.standard_normal((future.sum(), 2)) * 5

    before = walk_forward(FEATURES, WEALTH, MODELS, **OPTIONS).predictions
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ResearchWarning)  # a perturbed future may leave a fold one class
        after = walk_forward(features, wealth, MODELS, **OPTIONS).predictions
    cols = [f"p_{name}" for name in MODELS]
    early = before.index <= cutoff
    pd.testing.assert_frame_equal(before.loc[early, cols], after.loc[early, cols])
    assert after.loc[~early, cols].ne(before.loc[~early, cols]).any().any()  # the perturbation did reach the model


def test_unknown_columns_and_too_few_windows_are_refused() -> None:
    with pytest.raises(ConfigError, match="'x'"):
        walk_forward(FEATURES, WEALTH, {"x": ["volatility"]}, **OPTIONS)
    with pytest.raises(ConfigError, match="cannot give 4 test folds"):
        walk_forward(FEATURES.iloc[:402], WEALTH, MODELS, **OPTIONS)


def test_one_added_column_at_a_time_and_the_whole_set() -> None:
    features = FEATURES.assign(noise2=np.random.default_rng(8).standard_normal(len(FEATURES)))
    sets = nested_feature_sets(["noise"], ["precursor", "noise2"])
    assert sets == {
        "base": ["noise"],
        "base+precursor": ["noise", "precursor"],
        "base+noise2": ["noise", "noise2"],
        "base+all": ["noise", "precursor", "noise2"],
    }
    table = walk_forward(features, WEALTH, sets, **OPTIONS).table()
    assert list(table.index) == list(sets)
    assert table["n_columns"].tolist() == [1, 2, 2, 3]
    # the planted precursor is what helps; the added noise column does not
    assert table.loc["base+precursor", "pooled_auc"] > 0.85
    assert table.loc["base+noise2", "pooled_auc"] < 0.7


def test_l1_fit_drops_noise_columns() -> None:
    rng = np.random.default_rng(5)
    noise = pd.DataFrame(rng.standard_normal((len(FEATURES), 12)), index=FEATURES.index).add_prefix("n")
    features = FEATURES.join(noise)
    columns = ["precursor", *noise.columns]
    with pytest.warns(ResearchWarning, match="fewer than 1 per column for wide \\(13 columns\\)"):
        l2 = walk_forward(features, WEALTH, {"wide": columns}, **OPTIONS)
    with pytest.warns(ResearchWarning, match="penalty='l1'"):
        l1 = walk_forward(features, WEALTH, {"wide": columns}, penalty="l1", regularization=0.05, **OPTIONS)
    # with a strong L1 penalty (Tibshirani 1996: the lasso sets coefficients exactly to zero) the
    # precursor still ranks crashes, and the fit is no worse out of sample than the dense one
    assert l1.table().loc["wide", "pooled_auc"] > 0.8
    assert l1.table().loc["wide", "pooled_auc"] >= l2.table().loc["wide", "pooled_auc"] - 0.02
    assert not np.allclose(l1.predictions["p_wide"], l2.predictions["p_wide"])  # another fit


def test_nan_scores_say_why() -> None:
    flat = FEATURES.assign(flat=1.0)
    with pytest.warns(ResearchWarning) as caught:
        result = walk_forward(flat, WEALTH, {"flat": ["flat", "noise"]}, **{**OPTIONS, "n_folds": 8})
    message = str(caught[0].message)
    assert "['flat'] constant in the training windows" in message
    assert result.folds["notes"].str.contains("constant").all()
    one_class = result.folds[result.folds["n_test_positive"] == 0]
    for fold, auc, notes in zip(one_class["fold"], one_class["auc_flat"], one_class["notes"]):
        assert np.isnan(auc) and "test windows hold one class only" in notes
        assert f"fold {fold}: its test windows hold one class only" in message
