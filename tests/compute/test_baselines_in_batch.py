"""Baselines computed with the windows, in the workers: the same numbers as on their own.

References: :func:`riskshape.research.compute_baselines` (each window cut and admitted again,
then :func:`riskshape.research.baselines.window_baselines`), run serially; ``numpy.corrcoef``
(an outside implementation) for the correlation the shared covariance gives; each baseline's own
function for the values of one window.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.compute.distance import correlation_matrix, covariance_to_correlation
from riskshape.demo.scenario import Scenario
from riskshape.research import baselines as baselines_module
from riskshape.research.baselines import (
    absorption_ratio,
    compute_baselines,
    features_with_baselines,
    mean_pairwise_correlation,
    portfolio_volatility,
    turbulence,
    window_baselines,
)


def _alone(prices: pd.DataFrame, config: Config) -> pd.DataFrame:
    return compute_baselines(prices, config.replace(compute={"executor": "serial"}), prefix="base_")


@pytest.mark.parametrize(
    "options",
    [
        {"window": 20, "compute": {"executor": "serial"}},
        {"window": 20, "compute": {"executor": "process", "workers": 2, "batch_windows": 8}},
        {"window": 30, "step": 3, "correlation": "spearman", "compute": {"executor": "serial"}},
        {"window": 25, "estimator": "ledoit_wolf", "maxdim": 0, "compute": {"executor": "serial"}},
    ],
    ids=["serial", "pool", "spearman-step3", "ledoit-wolf-h0"],
)
def test_baselines_with_the_windows_equal_compute_baselines_bit_for_bit(
    small_scenario: Scenario, options: dict[str, object]
) -> None:
    config = Config(**options)  # type: ignore[arg-type]
    # a gap inside the history: the coverage policy imputes it, in both paths alike
    prices = small_scenario.prices.copy()
    prices.iloc[40:43, 2] = np.nan
    plain = monitor(prices, config)
    joined = monitor(prices, config, baselines=True)
    pd.testing.assert_frame_equal(joined.features, plain.features, check_exact=True)
    pd.testing.assert_frame_equal(joined.baselines, _alone(prices, config), check_exact=True, check_freq=False)
    # a result that did not ask for them computes them on demand: the same frame
    pd.testing.assert_frame_equal(plain.baselines, joined.baselines, check_exact=True, check_freq=False)
    assert (joined.baselines["base_n_assets"] == joined.features["n_assets"]).all()
    assert not set(joined.baselines.columns) & set(joined.features.columns)


def test_the_update_keeps_computing_baselines(small_scenario: Scenario) -> None:
    config = Config(window=20, compute={"executor": "serial"})
    prices = small_scenario.prices
    whole = monitor(prices, config, baselines=True)
    grown = monitor(prices.iloc[:-3], config, baselines=True).update(prices.iloc[-3:])
    assert grown.with_baselines
    pd.testing.assert_frame_equal(grown.baselines, whole.baselines, check_exact=True, check_freq=False)
    pd.testing.assert_frame_equal(grown.features, whole.features, check_exact=True, check_freq=False)


def test_features_with_baselines_reads_the_held_ones(small_scenario: Scenario, monkeypatch: pytest.MonkeyPatch) -> None:
    config = Config(window=20, compute={"executor": "serial"})
    held = monitor(small_scenario.prices, config, baselines=True)
    expected = features_with_baselines(monitor(small_scenario.prices, config), prefix="bl_")

    def refuse(*args: object, **kwargs: object) -> pd.DataFrame:
        raise AssertionError("the baselines were computed with the windows already")

    monkeypatch.setattr(baselines_module, "compute_baselines", refuse)
    pd.testing.assert_frame_equal(features_with_baselines(held, prefix="bl_"), expected, check_exact=True)


def test_one_covariance_gives_each_baseline_bit_for_bit(rng: np.random.Generator) -> None:
    for days, n in [(2, 2), (3, 5), (60, 48), (40, 80), (250, 30)]:
        block = rng.normal(size=(days, n)) * rng.uniform(0.1, 2.0, n) + rng.normal(size=(days, 1))
        block = np.ascontiguousarray(block)
        n_assets, vol, corr, ratio, turb = window_baselines(block)
        assert n_assets == n
        assert vol == portfolio_volatility(block)
        assert corr == mean_pairwise_correlation(block)
        assert ratio == absorption_ratio(block)
        assert turb == turbulence(block) or (np.isnan(turb) and np.isnan(turbulence(block)))


def test_the_correlation_of_a_covariance_is_numpys_corrcoef(rng: np.random.Generator) -> None:
    # source: numpy.corrcoef, made exactly symmetric with a unit diagonal (the engine's convention)
    for days, n in [(3, 2), (60, 48), (20, 70)]:
        block = np.ascontiguousarray(rng.normal(size=(days, n)) + rng.normal(size=(days, 1)))
        reference = np.corrcoef(block, rowvar=False)
        reference = np.clip((reference + reference.T) / 2.0, -1.0, 1.0)
        np.fill_diagonal(reference, 1.0)
        np.testing.assert_array_equal(correlation_matrix(block), reference)
        np.testing.assert_array_equal(covariance_to_correlation(np.cov(block, rowvar=False)), reference)
