"""H0 of a Vietoris-Rips filtration against single-linkage clustering.

Source: the H0 deaths of a Rips filtration are the edge weights of a minimum spanning tree, i.e.
the merge heights of single-linkage clustering (a standard result; e.g. Carlsson and Memoli 2010,
JMLR 11, cited from memory). Reference implementation: ``scipy.cluster.hierarchy.linkage(method="single")``.
Both of our paths are checked: ripser (``maxdim=1``) and the single-linkage fast path
(``maxdim=0``). ripser rounds distances to float32, so the reference heights are compared after
rounding to float32 as well (rtol 1e-6 covers one float32 ulp).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.cluster.hierarchy import linkage
from scipy.spatial.distance import pdist, squareform

from riskshape import Config, MonitorResult, monitor
from riskshape.compute.distance import correlation_matrix, correlation_to_distance
from riskshape.compute.persistence import compute_diagrams
from riskshape.compute.windows import select_assets
from riskshape.demo.scenario import Scenario


def _scipy_merge_heights(distance: np.ndarray) -> np.ndarray:
    """Single-linkage merge heights from scipy, float32 rounded, zero heights dropped (our convention)."""
    heights = linkage(squareform(distance, checks=False), method="single")[:, 2]
    heights = np.sort(heights.astype(np.float32).astype(float))
    return heights[heights > 0]


def _random_distance(rng: np.random.Generator, n: int, kind: str) -> np.ndarray:
    if kind == "euclidean":
        return squareform(pdist(rng.standard_normal((n, 4))))
    upper = rng.uniform(0.05, 2.0, size=(n, n))
    sym = np.triu(upper, 1)
    return sym + sym.T


@pytest.mark.parametrize("maxdim", [0, 1], ids=["single-linkage-path", "ripser-path"])
@pytest.mark.parametrize("kind", ["euclidean", "dissimilarity"])
def test_h0_deaths_are_single_linkage_heights_on_random_matrices(
    rng: np.random.Generator, maxdim: int, kind: str
) -> None:
    for n in (2, 3, 7, 15, 30):
        distance = _random_distance(rng, n, kind)
        h0 = compute_diagrams(distance, maxdim=maxdim, backend="ripser")[0]
        assert np.all(h0[:, 0] == 0.0)  # every H0 bar is born at 0 (all vertices enter at 0)
        np.testing.assert_allclose(np.sort(h0[:, 1]), _scipy_merge_heights(distance), rtol=1e-6, atol=0)
        assert len(h0) == n - 1  # n components merge n - 1 times (no ties in continuous draws)


def test_h0_with_tied_and_zero_distances(rng: np.random.Generator) -> None:
    """Duplicate points (distance 0) give zero-length bars, which our convention drops."""
    points = rng.standard_normal((8, 3))
    points = np.vstack([points, points[:3]])  # three exact duplicates
    distance = squareform(pdist(points))
    expected = _scipy_merge_heights(distance)
    assert len(expected) == 7  # 11 points, 3 merges at height 0 dropped, 7 left
    for maxdim in (0, 1):
        h0 = compute_diagrams(distance, maxdim=maxdim, backend="ripser")[0]
        np.testing.assert_allclose(np.sort(h0[:, 1]), expected, rtol=1e-6, atol=0)


def test_h0_on_scenario_windows_matches_single_linkage(small_scenario: Scenario) -> None:
    """Windows of the fictional market, built with the engine's own blocks and through monitor."""
    config = Config(window=40, step=30, maxdim=1, rips_backend="ripser", compute={"executor": "serial"})
    result = monitor(small_scenario.prices, config)
    assert len(result.window_ends) >= 4
    for end in result.window_ends:
        distance = _window_distance(result, end)
        expected = _scipy_merge_heights(distance)
        np.testing.assert_allclose(np.sort(result.diagram(end, 0)[:, 1]), expected, rtol=1e-6, atol=0)
        fast = compute_diagrams(distance, maxdim=0)[0]
        np.testing.assert_allclose(np.sort(fast[:, 1]), expected, rtol=1e-6, atol=0)


def test_h0_features_drop_the_infinite_bar_and_sum_the_merge_heights(small_scenario: Scenario) -> None:
    """The infinite H0 bar is left out of every summary (our documented convention): n assets give
    n - 1 finite bars, and total persistence is the sum of the single-linkage heights (scipy).
    The single-linkage path (maxdim=0) and ripser (maxdim=1) give the same H0 features.
    """
    base = Config(window=40, step=30, rips_backend="ripser", compute={"executor": "serial"})
    with_loops = monitor(small_scenario.prices, base.replace(maxdim=1))
    clusters_only = monitor(small_scenario.prices, base.replace(maxdim=0))
    h0_columns = [c for c in clusters_only.features.columns if c.startswith("h0_")]
    np.testing.assert_allclose(
        clusters_only.features[h0_columns].to_numpy(),
        with_loops.features[h0_columns].to_numpy(),
        rtol=1e-7,
        equal_nan=True,
    )
    for end in with_loops.window_ends:
        row = with_loops.features.loc[end]
        assert row["h0_n_bars"] == row["n_assets"] - 1
        heights = _scipy_merge_heights(_window_distance(with_loops, end))
        assert row["h0_total_persistence"] == pytest.approx(heights.sum(), rel=1e-6)


def _window_distance(result: MonitorResult, end: pd.Timestamp) -> np.ndarray:
    selection = select_assets(result.window_returns(end).to_numpy(), result.config.min_coverage)
    return correlation_to_distance(correlation_matrix(selection.block, result.config.correlation))
