"""Missing prices and the coverage policy; the returns and correlation options.

* Coverage policy (riskshape.compute.windows module notes): an asset enters a window only with at least
  ceil(min_coverage * window) returns present there and a non-constant series; every other
  asset is recorded in ``left_out`` with its reason: never silently dropped. Reference counts
  come from pandas (``np.log(prices).diff()`` and ``notna``).
* Returns: log returns equal ``np.log(prices).diff()``, simple returns equal pandas'
  ``pct_change(fill_method=None)`` (a missing price gives missing returns on both sides).
* Correlation: Pearson against ``pandas.DataFrame.corr``; Spearman against
  ``scipy.stats.spearmanr`` (Spearman's rho is Pearson's on ranks, average ranks for ties).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy.cluster.hierarchy import linkage
from scipy.spatial.distance import squareform
from scipy.stats import spearmanr

from riskshape import Config, monitor
from riskshape.compute.distance import correlation_matrix
from tests.kit.assets import codes

WINDOW = 20
COVERAGE = 0.9
# invented codes: four steady assets, then one that lists late, one that delists, one with holes, one flat
STEADY, (LATE, GONE, HOLE, FLAT) = codes(8)[:4], codes(8)[4:]


@pytest.fixture
def gappy_prices(rng: np.random.Generator) -> pd.DataFrame:
    """Eight fictional assets over 90 days: a late listing, a delisting, holes, a flat stretch."""
    n_days, names = 90, [*STEADY, LATE, GONE, HOLE, FLAT]
    factor = rng.normal(0.0, 0.01, (n_days, 1))
    returns = 0.6 * factor + rng.normal(0.0, 0.01, (n_days, len(names)))
    prices = pd.DataFrame(
        100.0 * np.exp(np.cumsum(returns, axis=0)),
        columns=names,
        index=pd.bdate_range("2032-03-01", periods=n_days, name="date"),
    )
    prices.iloc[:35, 4] = np.nan  # LATE lists on day 35
    prices.iloc[62:, 5] = np.nan  # GONE delists after day 61
    prices.iloc[[20, 21, 50], 6] = np.nan  # HOLE misses three days (each hole costs two returns)
    prices.iloc[30:55, 7] = prices.iloc[30, 7]  # FLAT does not move for 25 days
    return prices


def test_every_asset_is_used_or_left_out_with_its_reason(gappy_prices: pd.DataFrame) -> None:
    config = Config(window=WINDOW, step=1, min_coverage=COVERAGE, compute={"executor": "serial"})
    result = monitor(gappy_prices, config)
    reference = np.log(gappy_prices).diff().iloc[1:]  # log returns, NaN next to a missing price
    needed = math.ceil(COVERAGE * WINDOW)
    seen_reasons: set[str] = set()
    for end in result.window_ends:
        block = reference.loc[:end].iloc[-WINDOW:]
        counts = block.notna().sum()
        expected_out = {}
        for asset in gappy_prices.columns:
            if counts[asset] < needed:
                expected_out[asset] = f"coverage {counts[asset]}/{WINDOW} < {needed}"
            elif block[asset].dropna().nunique() == 1:
                expected_out[asset] = "zero variance"
        rows = result.left_out[result.left_out["window_end"] == end]
        assert dict(zip(rows["asset"], rows["reason"])) == expected_out, end
        used = result.assets(end)
        assert set(used).isdisjoint(expected_out)
        assert set(used) | set(expected_out) == set(gappy_prices.columns)  # nothing silently dropped
        assert list(used) == [a for a in gappy_prices.columns if a in used]  # column order kept
        assert result.features.loc[end, "n_assets"] == len(used)
        assert result.features.loc[end, "n_left_out"] == len(expected_out)
        seen_reasons |= {r.split(" ")[0] for r in expected_out.values()}
    assert seen_reasons == {"coverage", "zero"}  # both reasons met
    # the late lister is left out first, then enters once it has enough history
    late = result.left_out[result.left_out["asset"] == LATE]
    assert late["window_end"].max() < result.window_ends[-1]
    assert LATE in result.assets(result.window_ends[-1])
    assert GONE not in result.assets(result.window_ends[-1])


def test_log_and_simple_returns_match_pandas(gappy_prices: pd.DataFrame) -> None:
    base = Config(window=WINDOW, step=10, compute={"executor": "serial"})
    log = monitor(gappy_prices, base)
    expected_log = np.log(gappy_prices).diff().iloc[1:]
    pd.testing.assert_frame_equal(
        log.returns, expected_log, check_exact=False, rtol=1e-9, atol=1e-15, check_names=False, check_freq=False
    )
    simple = monitor(gappy_prices, base.replace(returns="simple"))
    expected_simple = gappy_prices.pct_change(fill_method=None).iloc[1:]
    pd.testing.assert_frame_equal(
        simple.returns, expected_simple, check_exact=False, rtol=1e-9, atol=1e-15, check_names=False, check_freq=False
    )
    # the option reaches the features: simple and log returns give (slightly) different correlations
    assert not np.allclose(simple.features["mean_correlation"], log.features["mean_correlation"], rtol=1e-9)


@pytest.mark.parametrize("returns", ["log", "simple"])
def test_mean_correlation_matches_pandas_pearson(gappy_prices: pd.DataFrame, returns: str) -> None:
    complete = gappy_prices[list(STEADY)]
    result = monitor(complete, Config(window=WINDOW, step=7, returns=returns, compute={"executor": "serial"}))
    reference = np.log(complete).diff() if returns == "log" else complete.pct_change(fill_method=None)
    for end in result.window_ends:
        corr = reference.loc[:end].iloc[-WINDOW:].corr().to_numpy()  # pandas: Pearson
        expected = corr[~np.eye(len(corr), dtype=bool)].mean()
        assert result.features.loc[end, "mean_correlation"] == pytest.approx(expected, rel=1e-9)


def test_spearman_is_pearson_on_ranks_as_in_scipy(rng: np.random.Generator) -> None:
    block = rng.standard_normal((40, 6))
    block[:, 2] = np.round(block[:, 2], 1)  # ties get average ranks
    np.testing.assert_allclose(correlation_matrix(block, "spearman"), spearmanr(block).statistic, rtol=1e-12)
    np.testing.assert_allclose(correlation_matrix(block, "pearson"), np.corrcoef(block, rowvar=False), rtol=1e-12)


def test_spearman_option_reaches_the_features_and_diagrams(gappy_prices: pd.DataFrame) -> None:
    complete = gappy_prices[list(STEADY)]
    config = Config(window=WINDOW, step=9, correlation="spearman", maxdim=1, compute={"executor": "serial"})
    result = monitor(complete, config)
    reference = np.log(complete).diff()
    for end in result.window_ends:
        rho = spearmanr(reference.loc[:end].iloc[-WINDOW:].to_numpy()).statistic
        assert result.features.loc[end, "mean_correlation"] == pytest.approx(
            rho[~np.eye(4, dtype=bool)].mean(), rel=1e-9
        )
        # H0 deaths are single-linkage heights of sqrt(2 (1 - rho_s)) (scipy), float32 rounded
        distance = np.sqrt(np.clip(2.0 * (1.0 - rho), 0.0, 4.0))
        heights = linkage(squareform(distance, checks=False), method="single")[:, 2]
        np.testing.assert_allclose(
            np.sort(result.diagram(end, 0)[:, 1]), np.sort(heights.astype(np.float32)), rtol=1e-6
        )
