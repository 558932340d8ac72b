"""Baselines against numpy/scipy linear algebra and their published definitions.

References: absorption ratio, Kritzman, Li, Page and Rigobon (2011), J. Portfolio Management
37(4):112 (top ceil(n/5) eigenvalues of the covariance over their sum); turbulence, Kritzman
and Li (2010), Financial Analysts Journal 66(5):30 (squared Mahalanobis distance); scipy's
``mahalanobis`` and numpy's ``linalg`` are the references for the arithmetic.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import mahalanobis

from riskshape import monitor
from riskshape.errors import DataError
from riskshape.research.baselines import (
    BASELINE_COLUMNS,
    absorption_ratio,
    compute_baselines,
    mean_pairwise_correlation,
    portfolio_volatility,
    turbulence,
)


def test_absorption_ratio_two_assets_matches_closed_form_eigenvalues() -> None:
    # hand computation: the eigenvalues of [[a, b], [b, c]] are (a + c)/2 +- sqrt(((a - c)/2)^2 + b^2)
    block = np.array([[0.01, 0.02], [-0.02, -0.01], [0.03, 0.01], [0.00, -0.02], [0.01, 0.03]])
    (a, b), (_, c) = np.cov(block, rowvar=False)
    top = (a + c) / 2 + math.sqrt(((a - c) / 2) ** 2 + b**2)
    assert absorption_ratio(block) == pytest.approx(top / (a + c), rel=1e-12)  # k = ceil(2/5) = 1


def test_absorption_ratio_default_k_against_numpy_eig(rng: np.random.Generator) -> None:
    block = rng.standard_normal((40, 11))
    eig = np.sort(np.linalg.eig(np.cov(block, rowvar=False))[0].real)[::-1]  # general solver as the reference
    k = math.ceil(11 / 5)  # = 3, as in the paper: one fifth of the assets, rounded up
    assert absorption_ratio(block) == pytest.approx(eig[:k].sum() / eig.sum(), rel=1e-10)
    assert absorption_ratio(block, k=5) == pytest.approx(eig[:5].sum() / eig.sum(), rel=1e-10)


def test_absorption_ratio_lies_in_unit_interval_and_rises_when_one_factor_dominates(rng: np.random.Generator) -> None:
    factor = rng.standard_normal((120, 1))
    noise = rng.standard_normal((120, 10))
    ratios = [absorption_ratio(beta * factor + noise) for beta in (0.0, 0.5, 1.0, 2.0, 4.0)]
    assert all(0.0 < r <= 1.0 for r in ratios)
    assert all(later > earlier for earlier, later in zip(ratios, ratios[1:]))
    assert absorption_ratio(np.hstack([factor, 2 * factor, -factor])) == pytest.approx(1.0)  # rank one


def test_absorption_ratio_rejects_bad_k(rng: np.random.Generator) -> None:
    with pytest.raises(DataError, match="k must be between 1 and the 4 assets"):
        absorption_ratio(rng.standard_normal((10, 4)), k=5)


def test_turbulence_matches_scipy_mahalanobis(rng: np.random.Generator) -> None:
    block = rng.standard_normal((50, 6)) @ rng.standard_normal((6, 6))
    history, today = block[:-1], block[-1]
    precision = np.linalg.inv(np.cov(history, rowvar=False))
    expected = mahalanobis(today, history.mean(axis=0), precision) ** 2
    assert turbulence(block) == pytest.approx(expected, rel=1e-9)


def test_turbulence_one_asset_by_hand() -> None:
    # preceding days 1, -1, 0: mean 0, sample variance 1; last day 2 -> 2^2 / 1
    assert turbulence(np.array([[1.0], [-1.0], [0.0], [2.0]])) == pytest.approx(4.0)


def test_turbulence_pseudo_inverse_ignores_a_duplicated_asset(rng: np.random.Generator) -> None:
    # a duplicated column makes the covariance singular; the Moore-Penrose pseudo-inverse gives the
    # same distance as the block without the duplicate (the duplicate adds no direction)
    block = rng.standard_normal((30, 3))
    doubled = np.hstack([block, block[:, :1]])
    assert np.linalg.matrix_rank(np.cov(doubled[:-1], rowvar=False)) == 3
    assert turbulence(doubled) == pytest.approx(turbulence(block), rel=1e-8)


def test_portfolio_volatility_is_the_equal_weight_quadratic_form(rng: np.random.Generator) -> None:
    block = rng.standard_normal((80, 5)) * 0.01
    w = np.full(5, 1 / 5)
    expected = math.sqrt(w @ np.cov(block, rowvar=False) @ w * 252)  # sqrt(252): annualisation, common practice
    assert portfolio_volatility(block) == pytest.approx(expected, rel=1e-10)


def test_mean_pairwise_correlation_against_numpy(rng: np.random.Generator) -> None:
    block = rng.standard_normal((30, 4))
    corr = np.corrcoef(block, rowvar=False)
    assert mean_pairwise_correlation(block) == pytest.approx(corr[np.triu_indices(4, 1)].mean(), rel=1e-12)


def test_compute_baselines_sits_on_the_monitors_windows(small_prices: pd.DataFrame, small_config) -> None:
    result = monitor(small_prices, small_config)
    baselines = compute_baselines(small_prices, small_config)
    assert baselines.index.equals(result.features.index)
    assert list(baselines.columns) == ["n_assets", *BASELINE_COLUMNS]
    # same windows, same admitted assets: the monitor's own n_assets and mean correlation agree
    assert (baselines["n_assets"] == result.features["n_assets"]).all()
    np.testing.assert_allclose(baselines["mean_correlation"], result.features["mean_correlation"], rtol=1e-12)
    from_returns = compute_baselines(result.returns, small_config, data_are_returns=True)
    pd.testing.assert_frame_equal(from_returns, baselines)
    assert baselines[list(BASELINE_COLUMNS)].notna().all().all()
    assert ((baselines["absorption_ratio"] > 0) & (baselines["absorption_ratio"] <= 1)).all()


@pytest.mark.parametrize(("days", "n"), [(60, 48), (250, 30), (30, 70)], ids=["days>assets", "long", "days<assets"])
def test_absorption_ratio_against_scikit_learn_pca(rng: np.random.Generator, days: int, n: int) -> None:
    # source: Kritzman, Li, Page and Rigobon (2011) define the absorption ratio as the share of the total
    # variance explained by the top fifth of the principal components; scikit-learn's PCA (an outside
    # implementation, its own SVD) gives each component's share as explained_variance_ratio_. With fewer
    # days than assets riskshape takes the eigenvalues of the days x days Gram matrix instead.
    from sklearn.decomposition import PCA

    block = 0.01 * (rng.standard_normal((days, 1)) * rng.uniform(0.2, 1.5, n) + rng.standard_normal((days, n)))
    k = math.ceil(n / 5)
    shares = PCA(svd_solver="full").fit(block).explained_variance_ratio_
    assert absorption_ratio(block) == pytest.approx(shares[:k].sum(), rel=1e-12)
    assert absorption_ratio(block, k=3) == pytest.approx(shares[:3].sum(), rel=1e-12)


@pytest.mark.parametrize(("days", "n"), [(60, 48), (40, 5), (49, 48), (30, 50)], ids=["full", "small", "n+1", "short"])
def test_turbulence_against_scipy_mahalanobis_with_a_pseudo_inverse(
    rng: np.random.Generator, days: int, n: int
) -> None:
    # source: Kritzman and Li (2010): turbulence is the squared Mahalanobis distance of the last day from
    # the mean of the preceding days under their covariance; scipy.spatial.distance.mahalanobis with
    # scipy.linalg.pinvh (the inverse where the covariance is regular, the pseudo-inverse with numpy's
    # matrix-rank tolerance where it is not) is the reference. "full" and "small" take the leverage path
    # (Sherman-Morrison on the whole window's Cholesky factor); "n+1" leaves the preceding days' covariance
    # singular (rank n - 1) although the whole window's is regular; "short" has fewer days than assets.
    from scipy.linalg import pinvh

    block = rng.standard_normal((days, 1)) * rng.uniform(0.5, 1.5, n) + rng.standard_normal((days, n))
    block[-1] += 3.0  # a turbulent last day
    history, today = block[:-1], block[-1]
    expected = mahalanobis(today, history.mean(axis=0), pinvh(np.cov(history, rowvar=False))) ** 2
    assert turbulence(block) == pytest.approx(expected, rel=1e-7)


def test_turbulence_of_a_single_outlier_by_the_leverage_path_stays_exact(rng: np.random.Generator) -> None:
    # a last day far outside the history: the leverage h comes close to (T - 1) / T, where the
    # Sherman-Morrison form h / (a (a - h)) loses digits first; the reference is scipy's mahalanobis
    # with the exact inverse (Kritzman and Li 2010)
    block = rng.standard_normal((80, 10))
    block[-1] = 40.0 * rng.standard_normal(10)
    history, today = block[:-1], block[-1]
    expected = mahalanobis(today, history.mean(axis=0), np.linalg.inv(np.cov(history, rowvar=False))) ** 2
    assert expected > 1e4
    assert turbulence(block) == pytest.approx(expected, rel=1e-9)
