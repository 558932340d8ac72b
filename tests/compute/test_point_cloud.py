"""The second embedding: the days of a window as points in R^n (Gidea and Katz 2018, Physica A 491).

References: the Rips diagrams of the point cloud are computed independently here with ripser on
scipy's Euclidean distances; the scaling law is elementary (a Rips filtration of points scaled
by c has every bar scaled by c, so landscape L1 norms, an area, scale by c^2; common practice
to read point-cloud norms next to volatility for that reason).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from ripser import ripser
from scipy.spatial.distance import pdist, squareform

from riskshape import Config, monitor
from riskshape.compute.summaries import landscape_norm
from tests.kit.assets import codes


def _prices(rng: np.random.Generator, n_days: int = 61, n_assets: int = 4, scale: float = 0.01) -> pd.DataFrame:
    returns = rng.normal(0.0, scale, size=(n_days - 1, n_assets))
    prices = 100.0 * np.exp(np.vstack([np.zeros(n_assets), np.cumsum(returns, axis=0)]))
    index = pd.bdate_range("2031-01-02", periods=n_days, name="date")
    return pd.DataFrame(prices, index=index, columns=list(codes(n_assets)))


def _config(standardize: bool) -> Config:
    return Config(
        window=60, step=1, embedding="point_cloud", standardize_cloud=standardize, compute={"executor": "serial"}
    )


@pytest.mark.parametrize("standardize", [False, True])
def test_point_cloud_diagrams_equal_ripser_on_the_days(rng: np.random.Generator, standardize: bool) -> None:
    prices = _prices(rng)
    result = monitor(prices, _config(standardize))
    end = result.window_ends[-1]
    points = np.log(prices.to_numpy()[1:] / prices.to_numpy()[:-1])  # the 60 log returns, one row per day
    if standardize:
        points = (points - points.mean(axis=0)) / points.std(axis=0)
    reference = ripser(squareform(pdist(points)), maxdim=1, distance_matrix=True)["dgms"]
    for dim in (0, 1):
        bars = reference[dim][np.isfinite(reference[dim][:, 1])]
        bars = bars[bars[:, 1] > bars[:, 0]].astype(np.float32).astype(float)
        ours = result.diagram(end, dim)
        assert len(ours) == len(bars) > 0
        np.testing.assert_allclose(np.sort(ours, axis=0), np.sort(bars, axis=0), rtol=1e-6)


def test_point_cloud_norms_scale_with_volatility_unless_standardised(rng: np.random.Generator) -> None:
    prices = _prices(rng)
    tripled = np.exp(3.0 * np.log(prices / prices.iloc[0])) * 100.0  # every log return times 3
    raw = [monitor(p, _config(False)).features.iloc[-1] for p in (prices, tripled)]
    assert raw[1]["h1_landscape_l1"] == pytest.approx(9.0 * raw[0]["h1_landscape_l1"], rel=1e-4)
    assert raw[1]["h0_total_persistence"] == pytest.approx(3.0 * raw[0]["h0_total_persistence"], rel=1e-4)
    standardised = [monitor(p, _config(True)).features.iloc[-1] for p in (prices, tripled)]
    assert standardised[1]["h1_landscape_l1"] == pytest.approx(standardised[0]["h1_landscape_l1"], rel=1e-5)
    # and the correlation-distance embedding does not see volatility at all
    corr = [monitor(p, Config(window=60, compute={"executor": "serial"})).features.iloc[-1] for p in (prices, tripled)]
    assert corr[1]["h0_total_persistence"] == pytest.approx(corr[0]["h0_total_persistence"], rel=1e-5)
    assert landscape_norm(np.array([[0.0, 3.0]]), 1) == pytest.approx(9.0 * landscape_norm(np.array([[0.0, 1.0]]), 1))
