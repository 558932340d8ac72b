"""Properties of the monitor: asset order does not matter, and nothing after t reaches a window ending by t.

* Reordering assets permutes the distance matrix, and Vietoris-Rips persistence depends on the
  metric space only, not on how its points are numbered (definition of the Rips filtration), so
  every summary is unchanged. Values may move by one float32 ulp (the correlation products are
  summed in another order before ripser rounds them), hence rtol 1e-6 on float columns.
* No look-ahead: a window labelled t uses returns up to t, which use prices up to
  t; changing any prices after t must leave every feature, diagram and left-out record of the
  windows ending at or before t bit for bit the same.

Property tests with hypothesis (bounded examples), serial executor, small windows.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from riskshape import Config, MonitorResult, monitor
from riskshape.demo.scenario import Scenario

CONFIG = Config(window=15, step=2, maxdim=1, rips_backend="ripser", compute={"executor": "serial"})
FLOAT_COLUMNS_RTOL = 1e-6


def _prices(scenario: Scenario) -> pd.DataFrame:
    """Ten assets over 70 days, with the scenario's gaps plus a late listing and an early delisting."""
    prices = scenario.prices.iloc[:70, :10].copy()
    prices.iloc[:25, 3] = np.nan  # lists late
    prices.iloc[50:, 7] = np.nan  # delists
    return prices


@pytest.fixture(scope="module")
def base(small_scenario: Scenario) -> MonitorResult:
    """The monitor over the unchanged prices (computed once for the module)."""
    return monitor(_prices(small_scenario), CONFIG)


@settings(max_examples=25, deadline=None)
@given(order=st.permutations(list(range(10))))
def test_summaries_do_not_depend_on_asset_order(base: MonitorResult, order: list[int]) -> None:
    shuffled = monitor(base.prices.iloc[:, order], CONFIG)

    a, b = base.features, shuffled.features
    assert list(a.columns) == list(b.columns) and a.index.equals(b.index)
    ints = [c for c in a.columns if a[c].dtype.kind == "i"]
    pd.testing.assert_frame_equal(a[ints], b[ints], check_exact=True)
    floats = [c for c in a.columns if c not in ints]
    np.testing.assert_allclose(a[floats].to_numpy(), b[floats].to_numpy(), rtol=FLOAT_COLUMNS_RTOL, atol=1e-12)
    for end in a.index:
        assert set(base.assets(end)) == set(shuffled.assets(end))
        for dim in (0, 1):
            x, y = base.diagram(end, dim), shuffled.diagram(end, dim)
            assert x.shape == y.shape
            np.testing.assert_allclose(np.sort(x, axis=0), np.sort(y, axis=0), rtol=FLOAT_COLUMNS_RTOL)
    key = ["window_end", "asset", "reason"]
    pd.testing.assert_frame_equal(
        base.left_out.sort_values(key).reset_index(drop=True),
        shuffled.left_out.sort_values(key).reset_index(drop=True),
    )


@settings(max_examples=25, deadline=None)
@given(
    cut=st.integers(min_value=16, max_value=68),
    how=st.sampled_from(["scale", "missing", "replace"]),
    seed=st.integers(0, 2**32 - 1),
)
def test_prices_after_t_change_no_window_ending_by_t(base: MonitorResult, cut: int, how: str, seed: int) -> None:
    prices = base.prices
    t = prices.index[cut]
    rng = np.random.default_rng(seed)
    changed = prices.copy()
    later = changed.index > t
    shape = changed.loc[later].shape
    if how == "scale":
        changed.loc[later] = changed.loc[later] * rng.uniform(0.5, 2.0, size=shape)
    elif how == "missing":
        values = changed.loc[later].to_numpy(copy=True)
        values[rng.random(shape) < 0.4] = np.nan
        changed.loc[later] = values
    else:
        changed.loc[later] = rng.uniform(1.0, 500.0, size=shape)
    assert not changed.loc[later].equals(prices.loc[later])

    before = base
    after = monitor(changed, CONFIG)
    assert before.window_ends.equals(after.window_ends)  # windows are anchored at the start
    done = before.window_ends[before.window_ends <= t]
    assert len(done) >= 1
    pd.testing.assert_frame_equal(before.features.loc[done], after.features.loc[done], check_exact=True)
    for end in done:
        assert before.assets(end) == after.assets(end)
        assert before.window_inputs_hash(end) == after.window_inputs_hash(end)
        for dim in (0, 1):
            np.testing.assert_array_equal(before.diagram(end, dim), after.diagram(end, dim))
    old = before.left_out[before.left_out["window_end"] <= t].reset_index(drop=True)
    new = after.left_out[after.left_out["window_end"] <= t].reset_index(drop=True)
    pd.testing.assert_frame_equal(old, new)
    if how == "replace" and len(done) < len(before.window_ends):
        # positive control: the first window after t does see the new prices
        first_after = before.window_ends[len(done)]
        assert before.window_inputs_hash(first_after) != after.window_inputs_hash(first_after)
        assert not before.features.loc[first_after].equals(after.features.loc[first_after])
