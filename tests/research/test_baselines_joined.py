"""Baselines with the features: the same windows, names that never clash, the same numbers.

Reference: :func:`riskshape.research.baselines.compute_baselines` itself (serial), and numpy's
``np.linalg.pinv`` for the turbulence of a positive definite covariance (Kritzman and Li 2010:
the squared Mahalanobis distance, the inverse covariance).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.demo.scenario import Scenario
from riskshape.research import compute_baselines, features_with_baselines
from riskshape.research.baselines import BASELINE_COLUMNS, turbulence


def test_joined_baselines_equal_compute_baselines_bit_for_bit(small_scenario: Scenario) -> None:
    config = Config(window=20, step=2, maxdim=1, compute={"executor": "process", "workers": 2, "batch_windows": 8})
    result = monitor(small_scenario.prices, config)
    joined = features_with_baselines(result)
    assert list(joined.columns[: len(result.features.columns)]) == list(result.features.columns)
    added = [c for c in joined.columns if c not in result.features.columns]
    assert added == ["base_n_assets", *(f"base_{c}" for c in BASELINE_COLUMNS)]  # no name clashes
    serial = compute_baselines(small_scenario.prices, config.replace(compute={"executor": "serial"}), prefix="base_")
    pd.testing.assert_frame_equal(joined[added], serial, check_exact=True, check_freq=False)
    pd.testing.assert_frame_equal(joined[result.features.columns], result.features, check_exact=True)
    # the same windows: each admits the assets the monitor admitted
    assert (joined["base_n_assets"] == result.features["n_assets"]).all()


def test_turbulence_by_cholesky_is_the_inverse_covariance_form(rng: np.random.Generator) -> None:
    block = rng.normal(size=(40, 6))
    history, today = block[:-1], block[-1]
    deviation = today - history.mean(axis=0)
    # source: numpy.linalg.pinv, the inverse of a positive definite covariance
    expected = deviation @ np.linalg.pinv(np.cov(history, rowvar=False)) @ deviation
    assert turbulence(block) == pytest.approx(expected, rel=1e-10)
    singular = np.hstack([block, block[:, :1]])  # a repeated column: the pseudo-inverse path
    assert turbulence(singular) == pytest.approx(expected, rel=1e-8)
