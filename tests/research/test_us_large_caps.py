"""A real market: calm (2005-2006) against stress (September to November 2008).

Data: the open dataset of daily prices of 20 large US stocks, 1990-2022, that the skfolio package
ships inside its wheel (test extra), loaded with ``skfolio.datasets.load_sp500_dataset`` and read
offline. 20 stocks, not an index.

What the literature reports, and what is checked:

* Onnela, Chakraborti, Kaski, Kertesz and Kanto (2003), "Dynamics of market correlations:
  taxonomy and portfolio analysis", Phys. Rev. E 68:056110: around the 1987 crash the mean
  correlation rises and the normalised length of the minimum spanning tree of the correlation
  distance sqrt(2 (1 - rho)) falls (the tree shrinks). The H0 deaths of the Vietoris-Rips
  filtration are the tree's edge lengths, so H0 total persistence is the tree length (checked
  here against scipy's minimum spanning tree). From memory of the paper: the direction, not the size.
* Kritzman, Li, Page and Rigobon (2011): the absorption ratio rises in market stress (their
  2008 charts; from memory).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.sparse.csgraph import minimum_spanning_tree

from riskshape import Config, monitor
from riskshape.compute.distance import correlation_matrix, correlation_to_distance
from riskshape.compute.windows import select_assets
from riskshape.research.baselines import compute_baselines

datasets = pytest.importorskip(
    "skfolio.datasets", reason="skfolio (test extra) ships the 20 US large-cap stocks dataset"
)

CONFIG = Config(window=60, step=5, maxdim=0, compute={"executor": "serial"})


@pytest.fixture(scope="module")
def period() -> tuple[pd.DataFrame, pd.DataFrame]:
    prices = datasets.load_sp500_dataset().loc["2004-06-01":"2009-03-31"]
    result = monitor(prices, CONFIG)
    baselines = compute_baselines(result.returns, CONFIG, data_are_returns=True)
    features = result.features.join(baselines.drop(columns=["mean_correlation", "n_assets"]))
    return features, result


def test_stress_windows_differ_from_calm_ones_as_the_literature_reports(period) -> None:
    features, _ = period
    calm = features.loc["2005-01-01":"2006-12-31"]
    stress = features.loc["2008-09-01":"2008-11-30"]
    assert len(calm) > 80 and len(stress) >= 12
    assert stress["mean_correlation"].mean() > calm["mean_correlation"].mean() + 0.15
    assert stress["h0_total_persistence"].mean() < 0.85 * calm["h0_total_persistence"].mean()  # tree shrinks
    assert stress["h0_total_persistence"].max() < calm["h0_total_persistence"].median()
    assert stress["absorption_ratio"].mean() > calm["absorption_ratio"].mean()
    assert stress["ew_volatility"].mean() > 2 * calm["ew_volatility"].mean()


def test_h0_total_persistence_is_the_minimum_spanning_tree_length(period) -> None:
    features, result = period
    end = features.loc["2008-10-01":].index[0]
    block = select_assets(result.window_returns(end).to_numpy(), CONFIG.min_coverage).block
    distance = correlation_to_distance(correlation_matrix(block))
    tree_length = minimum_spanning_tree(distance).sum()  # scipy as the reference
    # ripser and the single-linkage path round distances to float32
    assert features.loc[end, "h0_total_persistence"] == pytest.approx(tree_length, rel=1e-6)
    assert np.isfinite(features["h0_total_persistence"]).all()
