"""Surrogates keep what their definitions say they keep (numpy as the reference).

Phase randomisation (Prichard and Theiler 1994): adding the same phase to every asset at each
frequency keeps every periodogram and cross-periodogram, hence (Parseval) the sample covariance.
IAAFT (Schreiber and Schmitz 2000): each asset keeps exactly its values. Shuffles keep each
asset's values; bootstraps resample whole days.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.compute.monitor import settings_of
from riskshape.errors import ConfigError, DataError
from riskshape.research.surrogates import (
    METHODS,
    WindowSummaries,
    rolling_surrogate_zscores,
    surrogate,
    surrogate_zscores,
)


def _factor_block(rng: np.random.Generator, days: int = 64, assets: int = 8, beta: float = 1.0) -> np.ndarray:
    factor = rng.standard_normal((days, 1))
    return 0.01 * (beta * factor + rng.standard_normal((days, assets)))


def _mean_corr(x: np.ndarray) -> float:
    c = np.corrcoef(x, rowvar=False)
    return float(c[np.triu_indices(len(c), 1)].mean())


@pytest.mark.parametrize("method", METHODS)
def test_every_method_keeps_the_shape_and_changes_the_data(method: str, rng: np.random.Generator) -> None:
    block = _factor_block(rng)
    out = surrogate(block, method, rng)
    assert out.shape == block.shape and np.isfinite(out).all()
    assert not np.array_equal(out, block)


def test_shuffle_keeps_each_assets_values_and_destroys_correlation(rng: np.random.Generator) -> None:
    block = _factor_block(rng, days=250, beta=2.0)
    out = surrogate(block, "shuffle", rng)
    np.testing.assert_array_equal(np.sort(out, axis=0), np.sort(block, axis=0))
    assert _mean_corr(block) > 0.6
    assert abs(_mean_corr(out)) < 0.1  # independent permutations: correlations ~ N(0, 1/250)


def test_phase_randomisation_keeps_periodograms_and_the_sample_covariance(rng: np.random.Generator) -> None:
    block = _factor_block(rng, days=65)  # odd length: no Nyquist term
    out = surrogate(block, "phase", rng)
    np.testing.assert_allclose(
        np.abs(np.fft.rfft(out, axis=0)), np.abs(np.fft.rfft(block, axis=0)), rtol=1e-9, atol=1e-14
    )
    np.testing.assert_allclose(np.cov(out, rowvar=False), np.cov(block, rowvar=False), rtol=1e-9, atol=1e-14)
    even = _factor_block(rng, days=64)
    np.testing.assert_allclose(
        np.cov(surrogate(even, "phase", rng), rowvar=False), np.cov(even, rowvar=False), rtol=1e-9, atol=1e-14
    )


def test_iaaft_keeps_values_exactly_and_spectra_and_correlations_approximately(rng: np.random.Generator) -> None:
    block = _factor_block(rng, days=128)
    block[:, 0] = 0.01 * rng.standard_t(3, 128)  # a fat-tailed asset
    out = surrogate(block, "iaaft", rng)
    np.testing.assert_array_equal(np.sort(out, axis=0), np.sort(block, axis=0))
    power_in = np.abs(np.fft.rfft(block - block.mean(0), axis=0)) ** 2
    power_out = np.abs(np.fft.rfft(out - out.mean(0), axis=0)) ** 2
    # total power is fixed by the values; the spectrum's shape is kept up to the iteration's error
    assert np.corrcoef(power_in.ravel(), power_out.ravel())[0, 1] > 0.8
    assert _mean_corr(out) == pytest.approx(_mean_corr(block), abs=0.1)


def test_gaussian_surrogate_has_the_windows_covariance(rng: np.random.Generator) -> None:
    block = _factor_block(rng, days=4000, assets=4)
    out = surrogate(block, "gaussian", rng)
    # sampling error of a correlation over 4000 days is about (1 - rho^2) / sqrt(4000) ~ 0.012
    np.testing.assert_allclose(np.corrcoef(out, rowvar=False), np.corrcoef(block, rowvar=False), atol=0.05)
    np.testing.assert_allclose(out.var(axis=0), block.var(axis=0), rtol=0.1)  # sd of a variance ~ 2.2 %


@pytest.mark.parametrize("method", ["stationary_bootstrap", "moving_block_bootstrap"])
def test_bootstraps_resample_whole_days(method: str, rng: np.random.Generator) -> None:
    block = _factor_block(rng, days=50)
    out = surrogate(block, method, rng, block_size=5)
    rows = {tuple(r) for r in block}
    assert all(tuple(r) in rows for r in out)


def test_fourier_methods_refuse_missing_values(rng: np.random.Generator) -> None:
    block = _factor_block(rng)
    block[3, 2] = np.nan
    with pytest.raises(DataError, match="missing"):
        surrogate(block, "phase", rng)
    assert np.isnan(surrogate(block, "shuffle", rng)).sum() == 1  # shuffles move the gap along
    with pytest.raises(ConfigError, match="unknown surrogate method"):
        surrogate(_factor_block(rng), "fourier", rng)  # type: ignore[arg-type]


def test_zscores_flag_correlation_structure_against_shuffles(rng: np.random.Generator) -> None:
    summaries = WindowSummaries(settings_of(Config(maxdim=1)))
    test = surrogate_zscores(_factor_block(rng, beta=1.5), summaries, 30, "shuffle", rng)
    table = test.table()
    assert table.loc["mean_correlation", "z"] > 5  # shuffles destroy the common factor
    assert table.loc["mean_correlation", "p"] == pytest.approx(1 / 31)  # no surrogate as extreme: (1 + 0)/(30 + 1)
    assert table.loc["h0_total_persistence", "z"] < -3  # correlated assets: shorter H0 bars
    assert ((table["p"] > 0) & (table["p"] <= 1)).all()
    # and on data without structure, the same test does not flag it
    calm = surrogate_zscores(0.01 * rng.standard_normal((64, 8)), summaries, 30, "shuffle", rng).table()
    assert abs(calm.loc["mean_correlation", "z"]) < 3


def test_rolling_zscores_cover_the_chosen_windows(
    small_prices: pd.DataFrame, small_config: Config, rng: np.random.Generator
) -> None:
    result = monitor(small_prices, small_config)
    ends = result.window_ends[[10, 50]]
    table = rolling_surrogate_zscores(result, 5, "gaussian", rng, window_ends=ends)
    assert sorted(set(table["window_end"])) == list(ends)
    assert set(table["summary"]) >= {"mean_correlation", "h0_total_persistence", "h1_landscape_l1"}
    observed = table.set_index(["window_end", "summary"])["observed"]
    # the observed summaries are the monitor's own
    for end in ends:
        assert observed[(end, "h0_total_persistence")] == pytest.approx(
            result.features.loc[end, "h0_total_persistence"]
        )
        assert observed[(end, "mean_correlation")] == pytest.approx(result.features.loc[end, "mean_correlation"])
