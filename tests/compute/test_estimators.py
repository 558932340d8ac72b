"""Correlation estimators against their published definitions and scikit-learn.

* Ledoit-Wolf: scikit-learn's ``sklearn.covariance.LedoitWolf`` (an implementation of Ledoit and
  Wolf 2004, J. Multivariate Analysis 88(2):365) on the same standardised returns gives the same
  shrinkage intensity and the same matrix.
* Clipping: on pure noise the sample correlation's eigenvalues fill the Marchenko-Pastur bulk up to
  lambda+ = (1 + sqrt(N/T))^2 (Marchenko and Pastur 1967; Laloux, Cizeau, Bouchaud and Potters
  1999, Phys. Rev. Lett. 83(7):1467), so the clipped estimate is close to the identity; every
  eigenvalue above lambda+ is kept, the trace is kept.
* Market mode removed: in a one-factor model r_i = b_i f + e_i with independent e_i, the residual
  correlations are zero in the population (the definition of a one-factor model), so their mean
  over pairs is near zero once the first principal component is taken out.
* EWMA: with decay 1 every day weighs the same, so it is the sample correlation (numpy.corrcoef).
* No look-ahead and exact incremental updates, for every estimator, through the monitor.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.compute.distance import correlation_matrix
from riskshape.compute.estimators import (
    MATRIX_ESTIMATORS,
    clip_eigenvalues,
    clipped_correlation,
    estimate_correlation,
    ewma_correlation,
    ledoit_wolf_correlation,
    ledoit_wolf_shrinkage,
    marchenko_pastur_edge,
    market_removed_correlation,
    standardize_columns,
)
from riskshape.demo.scenario import Scenario

CLEANED = [name for name in MATRIX_ESTIMATORS if name != "sample"]


def _factor_returns(rng: np.random.Generator, days: int, assets: int, loading: float) -> np.ndarray:
    """One common factor with loadings around ``loading`` plus independent noise."""
    factor = rng.normal(size=(days, 1))
    betas = rng.uniform(0.5 * loading, 1.5 * loading, size=(1, assets))
    return factor * betas + rng.normal(size=(days, assets))


@pytest.mark.parametrize("shape", [(60, 20), (60, 100), (250, 30)], ids=lambda s: f"T{s[0]}-N{s[1]}")
def test_ledoit_wolf_equals_scikit_learn(rng: np.random.Generator, shape: tuple[int, int]) -> None:
    sklearn_covariance = pytest.importorskip("sklearn.covariance")
    block = _factor_returns(rng, shape[0], shape[1], loading=0.7)
    z = standardize_columns(block)
    # source: scikit-learn's LedoitWolf (Ledoit and Wolf 2004), on the same standardised returns
    fitted = sklearn_covariance.LedoitWolf().fit(z)
    assert ledoit_wolf_shrinkage(z) == pytest.approx(fitted.shrinkage_, rel=1e-10)
    np.testing.assert_allclose(ledoit_wolf_correlation(block), fitted.covariance_, rtol=1e-10, atol=1e-12)


def test_ledoit_wolf_shrinks_more_when_days_are_few(rng: np.random.Generator) -> None:
    # Ledoit and Wolf (2004), Theorem 3.1: the intensity falls like 1/T for fixed N
    few = ledoit_wolf_shrinkage(standardize_columns(_factor_returns(rng, 40, 30, 0.7)))
    many = ledoit_wolf_shrinkage(standardize_columns(_factor_returns(rng, 2000, 30, 0.7)))
    assert 0.0 < many < few <= 1.0


def test_marchenko_pastur_edge_by_hand() -> None:
    # lambda+ = (1 + sqrt(q))^2 with q = N/T (Laloux et al. 1999, eq. 2, unit variance)
    assert marchenko_pastur_edge(100, 250) == pytest.approx((1 + np.sqrt(0.4)) ** 2)
    assert marchenko_pastur_edge(1, 1) == pytest.approx(4.0)


def test_clipped_estimate_of_pure_noise_is_near_the_identity(rng: np.random.Generator) -> None:
    days, assets = 250, 100
    block = rng.normal(size=(days, assets))
    sample = correlation_matrix(block)
    eigenvalues = np.linalg.eigvalsh(sample)
    edge = marchenko_pastur_edge(assets, days)
    # Marchenko-Pastur: the sample bulk of pure noise reaches about lambda+ = 2.66, far from 1
    assert eigenvalues.max() > 2.0
    assert np.abs(sample - np.eye(assets)).max() > 0.15
    clipped = clipped_correlation(block)
    # the tolerance allows one eigenvalue a little above lambda+ (a Tracy-Widom fluctuation), which
    # would be kept and move the clipped matrix by (lambda - mean) v v'
    assert np.abs(clipped - np.eye(assets)).max() < 0.05
    if eigenvalues.max() <= edge:  # none above the edge: every eigenvalue becomes the mean, 1
        np.testing.assert_allclose(clipped, np.eye(assets), atol=1e-12)


def test_clipping_keeps_every_eigenvalue_above_the_edge_and_the_trace(rng: np.random.Generator) -> None:
    days, assets = 250, 100
    block = _factor_returns(rng, days, assets, loading=0.8)  # a market mode far above the edge
    eigenvalues = np.linalg.eigvalsh(correlation_matrix(block))
    edge = marchenko_pastur_edge(assets, days)
    above = eigenvalues > edge
    assert above.sum() >= 1
    cleaned = clip_eigenvalues(eigenvalues, days)
    np.testing.assert_array_equal(cleaned[above], eigenvalues[above])
    assert np.unique(cleaned[~above]).size == 1
    assert cleaned.sum() == pytest.approx(eigenvalues.sum(), rel=1e-12)
    assert cleaned.sum() == pytest.approx(assets, rel=1e-12)


def test_market_removed_correlation_of_a_one_factor_model_has_mean_near_zero(rng: np.random.Generator) -> None:
    block = _factor_returns(rng, 500, 40, loading=1.0)
    pairs = np.triu_indices(40, 1)
    assert correlation_matrix(block)[pairs].mean() > 0.3  # the factor is strong in the raw correlation
    residual = market_removed_correlation(block)
    assert abs(residual[pairs].mean()) < 0.05


def test_ewma_with_decay_one_is_the_sample_correlation(rng: np.random.Generator) -> None:
    block = rng.normal(size=(60, 8))
    np.testing.assert_allclose(ewma_correlation(block, decay=1.0), np.corrcoef(block, rowvar=False), atol=1e-12)


def test_ewma_weighs_recent_days_more(rng: np.random.Generator) -> None:
    # first half independent, second half almost identical series: the recent half dominates
    calm = rng.normal(size=(30, 2))
    common = rng.normal(size=(30, 1))
    joined = common + 0.1 * rng.normal(size=(30, 2))
    block = np.vstack([calm, joined])
    assert ewma_correlation(block)[0, 1] > correlation_matrix(block)[0, 1] > 0.3


def test_sample_is_the_plain_estimate_bit_for_bit(rng: np.random.Generator) -> None:
    block = rng.normal(size=(40, 6))
    for method in ("pearson", "spearman"):
        np.testing.assert_array_equal(estimate_correlation(block, method, "sample"), correlation_matrix(block, method))


@pytest.mark.parametrize("estimator", CLEANED)
@pytest.mark.parametrize("method", ["pearson", "spearman"])
def test_every_estimate_is_a_correlation_matrix(rng: np.random.Generator, estimator: str, method: str) -> None:
    block = _factor_returns(rng, 30, 45, loading=0.6)  # more assets than days
    corr = estimate_correlation(block, method, estimator)  # type: ignore[arg-type]
    assert corr.shape == (45, 45)
    np.testing.assert_array_equal(corr, corr.T)
    np.testing.assert_array_equal(np.diag(corr), 1.0)
    assert np.all(np.abs(corr) <= 1.0)
    assert np.linalg.eigvalsh(corr).min() > -1e-9  # positive semidefinite: the distance is a metric


# --- through the monitor -----------------------------------------------------------------------------


def _prices(scenario: Scenario) -> pd.DataFrame:
    prices = scenario.prices.iloc[:60, :9].copy()
    prices.iloc[:20, 2] = np.nan  # a late listing
    return prices


def _config(estimator: str) -> Config:
    return Config(
        window=12,
        estimator=estimator,
        maxdim=1,
        rips_backend="ripser",
        compute={"executor": "serial", "batch_windows": 5},
    )


@pytest.mark.parametrize("estimator", CLEANED)
def test_estimator_changes_the_features_and_is_hashed(small_scenario: Scenario, estimator: str) -> None:
    prices = _prices(small_scenario)
    sample = monitor(prices, _config("sample"))
    other = monitor(prices, _config(estimator))
    assert other.config.estimator == estimator
    assert other.config.hash() != sample.config.hash()
    assert not np.allclose(other.features["h0_total_persistence"], sample.features["h0_total_persistence"])
    assert Config.from_mapping(other.config.to_mapping()).estimator == estimator  # what the manifest holds


@pytest.mark.parametrize("estimator", CLEANED)
def test_no_look_ahead_and_exact_update(small_scenario: Scenario, estimator: str) -> None:
    prices = _prices(small_scenario)
    config = _config(estimator)
    batch = monitor(prices, config)
    t = prices.index[35]
    changed = prices.copy()
    later = changed.index > t
    changed.loc[later] = changed.loc[later] * np.random.default_rng(3).uniform(0.5, 2.0, changed.loc[later].shape)
    after = monitor(changed, config)
    done = batch.window_ends[batch.window_ends <= t]
    pd.testing.assert_frame_equal(batch.features.loc[done], after.features.loc[done], check_exact=True)
    first_after = batch.window_ends[len(done)]
    assert not batch.features.loc[first_after].equals(after.features.loc[first_after])  # positive control

    updated = monitor(prices.iloc[:30], config).update(prices.iloc[30:])
    pd.testing.assert_frame_equal(updated.features, batch.features, check_exact=True)
    for end in batch.window_ends:
        for dim in (0, 1):
            np.testing.assert_array_equal(updated.diagram(end, dim), batch.diagram(end, dim))
