"""Synthetic factor-model prices for the benchmarks (fictional assets, seeded, no gaps).

Daily log returns r = 0.01 * (b_m * market + b_s * sector + idiosyncratic), standard normal
factors, one of ten sectors per asset, loadings drawn once: b_m in [0.5, 1.0], b_s in
[0.4, 0.9]. Mean off-diagonal correlation about 0.3, in the range of daily equity returns.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["factor_returns", "factor_prices"]


def factor_returns(n_days: int, n_assets: int, seed: int = 0, n_sectors: int = 10) -> np.ndarray:
    """(n_days, n_assets) log returns of the factor model."""
    rng = np.random.default_rng(seed)
    sector = rng.integers(0, n_sectors, n_assets)
    market = rng.standard_normal(n_days)[:, None] * rng.uniform(0.5, 1.0, n_assets)
    sectors = rng.standard_normal((n_days, n_sectors))[:, sector] * rng.uniform(0.4, 0.9, n_assets)
    return 0.01 * (market + sectors + rng.standard_normal((n_days, n_assets)))


def factor_prices(n_days: int, n_assets: int, seed: int = 0) -> pd.DataFrame:
    """Wide prices (business days from 2031-01-02) whose log returns are :func:`factor_returns`."""
    returns = factor_returns(n_days, n_assets, seed)
    levels = 100.0 * np.exp(np.vstack([np.zeros((1, n_assets)), np.cumsum(returns, axis=0)]))
    index = pd.bdate_range("2031-01-02", periods=n_days + 1, name="date")
    codes = [f"XB{j:04d}" for j in range(n_assets)]  # invented codes (the X prefix of tests/kit/assets.py)
    return pd.DataFrame(levels, index=index, columns=codes)
