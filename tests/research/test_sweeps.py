"""Sweeps: one study per grid point, the same whichever executor runs them."""

from __future__ import annotations

import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.errors import ResearchWarning
from riskshape.research.events import equal_weight_wealth, events_from_periods
from riskshape.research.study import study_table
from riskshape.research.sweeps import sweep


def test_sweep_runs_the_study_per_grid_point_identically_on_any_executor(small_prices: pd.DataFrame) -> None:
    days = small_prices.index  # an arbitrary episode: the sweep only has to run the same study everywhere
    events = events_from_periods(
        pd.DataFrame({"start": [days[110]], "end": [days[120]]}), equal_weight_wealth(small_prices)
    )
    options = dict(
        windows=(20, 30),
        steps=(3, 5),
        columns=["mean_correlation", "h0_total_persistence"],
        directions={"h0_total_persistence": "below"},
        horizon=5,
        lookback=30,
    )
    serial = sweep(small_prices, events, config=Config(compute={"executor": "serial"}), **options)
    pooled = sweep(small_prices, events, config=Config(compute={"executor": "process", "workers": 2}), **options)
    pd.testing.assert_frame_equal(serial.table, pooled.table)
    assert set(serial.table.index.droplevel("signal")) == {(20, 3), (20, 5), (30, 3), (30, 5)}
    # each grid point is the plain study of that configuration's monitor run
    cfg = Config(window=30, step=5, compute={"executor": "serial"})
    with pytest.warns(ResearchWarning, match="precision is NaN"):  # the sweep keeps the reasons in its table
        direct = study_table(
            monitor(small_prices, cfg).features,
            events,
            columns=["mean_correlation"],
            horizon=5,
            lookback=30,
            post_event_days=30,
        )
    assert serial.table.loc[(30, 5, "mean_correlation"), "auc"] == direct.loc["mean_correlation", "auc"]
    assert serial.table.loc[(30, 5, "mean_correlation"), "nan_reasons"] == direct.loc["mean_correlation", "nan_reasons"]
    assert serial.pivot("auc").shape == (2, 4)
