"""The derived columns' maths (riskshape.compute.derived, .trailing_fit), against outside references.

* The trailing residual at t is the residual of an ordinary least-squares fit on the slice
  t - L .. t - 1 (its complete rows): checked against ``numpy.linalg.lstsq`` and against
  ``statsmodels.api.OLS`` fitted on the same slice; the z-score against statsmodels'
  ``get_prediction(...).se_obs``, the standard error of a new observation
  ``s * sqrt(1 + x' (X'X)^-1 x)`` (statsmodels documentation of ``PredictionResults``).
* A rank-deficient slice gives the minimum-norm solution, as ``numpy.linalg.lstsq`` does.
* On a summary that is an exact linear function of the two regressors plus noise, the residual
  recovers the noise (the fit's error shrinks as sqrt(p / L): common practice, a property of OLS),
  and the z-score of Gaussian noise is Student t with L - 3 degrees of freedom (variance
  (L - 3) / (L - 5); a textbook property of the studentized prediction error).
* Changes equal pandas' ``Series.diff(h / step)``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from riskshape.compute.derived import (
    derive_columns,
    derived_column_names,
    derived_source,
    extend_columns,
    history_needed,
    net_of_market,
    summary_changes,
)
from riskshape.compute.trailing_fit import trailing_residuals
from riskshape.config import DerivedConfig


def _design(rng: np.random.Generator, n: int) -> np.ndarray:
    """[1, mean correlation, volatility], loosely like a desk's two numbers (correlated with each other)."""
    corr = np.clip(0.35 + np.cumsum(rng.normal(0, 0.02, n)), 0.05, 0.95)
    vol = 0.12 + 0.3 * corr + rng.normal(0, 0.02, n)
    return np.column_stack([np.ones(n), corr, vol])


def test_residual_and_z_equal_lstsq_and_statsmodels_on_the_same_slice(rng: np.random.Generator) -> None:
    n, window = 120, 40
    design = _design(rng, n)
    y = design @ np.array([2.0, -1.5, 0.8]) + rng.standard_t(5, n) * 0.1
    y[[50, 77]] = np.nan  # a missing summary: left out of the fits that hold it
    design[63, 2] = np.nan  # a missing regressor likewise
    residual, z, code = trailing_residuals(y, design, window)
    checked = 0
    for t in range(window, n):
        rows = np.arange(t - window, t)
        rows = rows[np.isfinite(y[rows]) & np.isfinite(design[rows]).all(axis=1)]
        if not (np.isfinite(y[t]) and np.isfinite(design[t]).all()):
            assert np.isnan(residual[t]) and code[t] == 3
            continue
        coef = np.linalg.lstsq(design[rows], y[rows], rcond=None)[0]  # reference: numpy's least squares
        np.testing.assert_allclose(residual[t], y[t] - design[t] @ coef, rtol=1e-9, atol=1e-12)
        fit = sm.OLS(y[rows], design[rows]).fit()  # reference: statsmodels OLS on the same slice
        prediction = fit.get_prediction(design[t][None, :])
        np.testing.assert_allclose(residual[t], y[t] - prediction.predicted_mean[0], rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(z[t], residual[t] / prediction.se_obs[0], rtol=1e-8)
        checked += 1
    assert checked == n - window - 3  # rows 50, 63 and 77 themselves are missing
    assert np.isnan(residual[:window]).all() and (code[:window] == 1).all()


def test_a_rank_deficient_slice_gives_the_minimum_norm_fit_of_lstsq(rng: np.random.Generator) -> None:
    n, window = 60, 25
    design = _design(rng, n)
    design[:45, 2] = 0.2  # volatility constant over the early slices: collinear with the intercept
    y = 1.0 + 2.0 * design[:, 1] + rng.normal(0, 0.05, n)
    residual, z, _ = trailing_residuals(y, design, window)
    for t in (window, 35, 44):
        coef = np.linalg.lstsq(design[t - window : t], y[t - window : t], rcond=None)[0]  # reference: numpy
        np.testing.assert_allclose(residual[t], y[t] - design[t] @ coef, rtol=1e-9, atol=1e-12)
    assert np.isfinite(z[window:]).all()


def test_the_residual_recovers_the_noise_of_a_linear_summary(rng: np.random.Generator) -> None:
    n, window, sigma = 2000, 250, 0.05
    design = _design(rng, n)
    noise = rng.normal(0.0, sigma, n)
    days = pd.bdate_range("2031-01-01", periods=n)
    corr, vol = pd.Series(design[:, 1], days), pd.Series(design[:, 2], days)
    summary = pd.DataFrame({"h0_total_persistence": 3.0 - 2.5 * design[:, 1] + 1.2 * design[:, 2] + noise}, days)
    net = net_of_market(summary, corr, vol, window).frame
    residual = net["h0_total_persistence_net"].to_numpy()[window:]
    z = net["h0_total_persistence_net_z"].to_numpy()[window:]
    error = residual - noise[window:]
    # the out-of-sample error is x_t'(beta - b_t): about sigma * sqrt(p / L) = 0.11 sigma in RMS
    assert np.sqrt(np.mean(error**2)) < 0.2 * sigma
    assert np.corrcoef(residual, noise[window:])[0, 1] > 0.98
    # Student t with L - 3 = 247 degrees of freedom: variance 247 / 245, about 1; 1750 overlapping draws
    assert abs(np.mean(z)) < 0.1 and 0.9 < np.var(z) < 1.1


def test_an_exact_summary_has_zero_residual_and_no_z_and_says_why() -> None:
    n, window = 40, 12
    x = np.linspace(0.2, 0.6, n) + 0.05 * np.sin(np.arange(n))
    days = pd.bdate_range("2031-01-01", periods=n)
    corr, vol = pd.Series(x, days), pd.Series(0.1 + x**2, days)
    exact = pd.DataFrame({"h1_entropy": 1.0 + 2.0 * corr - 3.0 * vol}, days)
    result = net_of_market(exact, corr, vol, window)
    np.testing.assert_allclose(result.frame["h1_entropy_net"].iloc[window:], 0.0, atol=1e-10)
    assert result.frame["h1_entropy_net_z"].isna().all()
    reasons = result.nan_reasons()
    assert (
        reasons["h1_entropy_net"]
        == f"{window} window(s) before the trailing fit has net_of_market_window = 12 earlier ones"
    )
    assert f"{n - window} window(s) where the trailing fit is exact" in reasons["h1_entropy_net_z"]


def test_too_few_complete_windows_in_the_slice_gives_nan_with_the_reason(rng: np.random.Generator) -> None:
    n, window = 80, 20
    design = _design(rng, n)
    y = design @ np.array([1.0, 1.0, 1.0]) + rng.normal(0, 0.1, n)
    y[30:42] = np.nan  # 12 missing: a slice covering them holds 8 complete windows, fewer than 10
    residual, _, code = trailing_residuals(y, design, window)
    assert code[50] == 2 and np.isnan(residual[50])  # slice 30..49: 8 complete
    assert code[52] == 0 and np.isfinite(residual[52])  # slice 32..51: 10 complete, enough
    days = pd.bdate_range("2031-01-01", periods=n)
    frame = pd.DataFrame({"h0_entropy": y}, days)
    why = net_of_market(frame, pd.Series(design[:, 1], days), pd.Series(design[:, 2], days), window).nan_reasons()
    assert (
        "hold fewer than 10 with the summary, mean_correlation and ew_volatility all present" in why["h0_entropy_net"]
    )
    assert "where the summary, mean_correlation or ew_volatility is missing" in why["h0_entropy_net"]


@pytest.mark.parametrize("step", [1, 2, 5], ids=lambda s: f"step{s}")
def test_changes_equal_pandas_diff(rng: np.random.Generator, step: int) -> None:
    days = pd.bdate_range("2031-01-01", periods=90)
    values = rng.normal(size=90)
    values[[10, 40]] = np.nan
    frame = pd.DataFrame({"h1_landscape_l2": values}, days)
    horizons = [10, 20, 60]
    changes = summary_changes(frame, horizons, step)
    for h in horizons:
        expected = frame["h1_landscape_l2"].diff(h // step)  # reference: pandas
        pd.testing.assert_series_equal(changes.frame[f"h1_landscape_l2_chg_{h}"], expected, check_names=False)
        assert changes.nan_reasons()[f"h1_landscape_l2_chg_{h}"].startswith(
            f"{h // step} window(s) before {h} trading days of history; "
        )


def test_names_follow_the_settings_and_never_clash() -> None:
    base = ["n_assets", "n_left_out", "mean_correlation", "h0_n_bars", "h0_entropy", "h1_wasserstein"]
    names = derived_column_names(base, DerivedConfig(net_of_market=True, change_horizons=[20, 100]))
    assert not set(names) & set(base) and len(set(names)) == len(names)
    assert names[:2] == ["h0_n_bars_net", "h0_n_bars_net_z"]
    assert "mean_correlation_chg_100" in names and "mean_correlation_net" not in names
    assert derived_column_names(base, DerivedConfig()) == []
    assert derived_source("h1_wasserstein_chg_100") == ("h1_wasserstein", "add 100 to change_horizons")


def test_derive_columns_are_the_parts_side_by_side(rng: np.random.Generator) -> None:
    days = pd.bdate_range("2031-01-01", periods=50)
    features = pd.DataFrame(
        {"n_assets": 8, "mean_correlation": rng.uniform(0.2, 0.5, 50), "h0_entropy": rng.normal(size=50)}, days
    )
    vol = pd.Series(rng.uniform(0.1, 0.2, 50), days)
    settings = DerivedConfig(net_of_market=True, net_of_market_window=20, change_horizons=[5])
    out = derive_columns(features, vol, settings)
    assert list(out.frame.columns) == derived_column_names(list(features.columns), settings)
    net = net_of_market(features[["h0_entropy"]], features["mean_correlation"], vol, 20).frame
    pd.testing.assert_frame_equal(out.frame[net.columns], net)
    assert derive_columns(features, vol, DerivedConfig()).frame.empty


def test_extending_held_columns_reads_only_the_history_needed_and_equals_the_whole(rng: np.random.Generator) -> None:
    n, held_rows = 200, 150
    days = pd.bdate_range("2031-01-01", periods=n)
    design = _design(rng, n)
    features = pd.DataFrame(
        {
            "mean_correlation": design[:, 1],
            "h0_total_persistence": 2.0 - design[:, 1] + rng.normal(0, 0.05, n),
            "h0_wasserstein": np.r_[np.nan, rng.gamma(2.0, 0.1, n - 1)],  # missing at the first window only
        },
        days,
    )
    vol = pd.Series(design[:, 2], days)
    settings = DerivedConfig(net_of_market=True, net_of_market_window=60, change_horizons=[4, 20])
    step = 2
    whole = derive_columns(features, vol, settings, step)
    held = derive_columns(features.iloc[:held_rows], vol.iloc[:held_rows], settings, step)
    asked: list[int] = []

    def volatility_of(ends: pd.DatetimeIndex) -> pd.Series:
        asked.append(len(ends))
        return vol.loc[ends]

    extended = extend_columns(held, features, volatility_of, settings, step)
    assert asked == [n - (held_rows - history_needed(settings, step))] == [110]  # 60 held windows + 50 new
    pd.testing.assert_frame_equal(extended.frame, whole.frame, check_exact=True)
    pd.testing.assert_frame_equal(extended.codes, whole.codes, check_exact=True)
    assert extended.nan_reasons() == whole.nan_reasons()
