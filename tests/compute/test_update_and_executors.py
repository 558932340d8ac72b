"""Incremental update equals the batch; every executor gives the serial result.

Contract (the seams in DEVELOPERS.md, and ``MonitorResult.update``'s docstring):
``monitor(prefix).update(rest)`` equals ``monitor(all)``, bit for bit, for any split point and any
step; the executors (serial, a local process pool, a Dask cluster) only change where windows are
computed, never the numbers.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, DataError, MonitorResult, monitor
from riskshape.compute.batch import compute_batch
from riskshape.compute.executors import DaskExecutor, SerialExecutor
from riskshape.compute.monitor import settings_of
from riskshape.demo.scenario import Scenario

WINDOW = 12


def _prices(scenario: Scenario) -> pd.DataFrame:
    prices = scenario.prices.iloc[:60, :9].copy()
    prices.iloc[:20, 2] = np.nan  # a late listing crosses the split points
    return prices


def _config(step: int, **compute: object) -> Config:
    return Config(
        window=WINDOW,
        step=step,
        maxdim=1,
        rips_backend="ripser",
        compute={"executor": "serial", "batch_windows": 5, **compute},
    )


def assert_same_result(a: MonitorResult, b: MonitorResult) -> None:
    """Every output of two results is identical (features, windows, diagrams, left-out, hashes)."""
    assert a.window_ends.equals(b.window_ends)
    pd.testing.assert_frame_equal(a.features, b.features, check_exact=True)
    pd.testing.assert_frame_equal(a.left_out, b.left_out)
    pd.testing.assert_frame_equal(a.prices, b.prices, check_exact=True)
    pd.testing.assert_frame_equal(a.returns, b.returns, check_exact=True)
    assert a.input_hash == b.input_hash
    for end in a.window_ends:
        assert a.assets(end) == b.assets(end)
        assert a.window_inputs_hash(end) == b.window_inputs_hash(end)
        for dim in range(a.config.maxdim + 1):
            np.testing.assert_array_equal(a.diagram(end, dim), b.diagram(end, dim))


@pytest.mark.parametrize("step", [1, 3])
def test_update_equals_batch_at_several_split_points(small_scenario: Scenario, step: int) -> None:
    prices = _prices(small_scenario)
    config = _config(step)
    batch = monitor(prices, config)
    assert len(batch.window_ends) > 10
    for split in (WINDOW + 1, WINDOW + 2, 25, 40, len(prices) - 1):
        updated = monitor(prices.iloc[:split], config).update(prices.iloc[split:])
        assert_same_result(updated, batch)


def test_update_one_day_at_a_time_equals_batch(small_scenario: Scenario) -> None:
    prices = _prices(small_scenario)
    config = _config(2)
    result = monitor(prices.iloc[:45], config)
    for day in range(45, len(prices)):
        result = result.update(prices.iloc[[day]])
    assert_same_result(result, monitor(prices, config))


def test_features_read_before_each_update_grow_to_the_batch_table(small_scenario: Scenario) -> None:
    """Where the features were read already, an update adds the new windows' rows to them only."""
    prices = _prices(small_scenario)
    config = _config(1)
    result = monitor(prices.iloc[:40], config)
    for day in range(40, len(prices), 3):
        held = result.features
        result = result.update(prices.iloc[day : day + 3])
        assert result.__dict__["_held_summaries"] is held  # grown from the rows held, not rebuilt
        pd.testing.assert_frame_equal(result.features.iloc[: len(held)], held, check_exact=True)
    batch = monitor(prices, config)
    pd.testing.assert_frame_equal(result.features, batch.features, check_exact=True)
    assert result.features.index.equals(batch.features.index) and result.features.index.name == "window_end"
    assert list(result.features.dtypes) == list(batch.features.dtypes)


def test_update_accepts_matching_overlap_and_rejects_revised_prices(small_scenario: Scenario) -> None:
    prices = _prices(small_scenario)
    config = _config(1)
    first = monitor(prices.iloc[:40], config)
    updated = first.update(prices.iloc[30:])
    assert_same_result(updated, monitor(prices, config))
    # only the new windows were computed: the old ones are carried over as they were
    assert all(new is old for new, old in zip(updated.windows, first.windows))
    revised = prices.iloc[30:].copy()
    revised.iloc[2, 0] *= 1.01
    with pytest.raises(DataError, match="different prices"):
        first.update(revised)


def test_process_executor_equals_serial(small_scenario: Scenario) -> None:
    prices = _prices(small_scenario)
    serial = monitor(prices, _config(1))
    pooled = monitor(prices, _config(1, executor="process", workers=2))
    assert_same_result(pooled, serial)


def test_dask_executor_equals_serial(small_scenario: Scenario) -> None:
    distributed = pytest.importorskip("distributed")
    prices = _prices(small_scenario)
    config = _config(1)
    serial = monitor(prices, config)
    with (
        distributed.LocalCluster(n_workers=1, processes=False, dashboard_address=":0") as cluster,
        distributed.Client(cluster) as client,
    ):
        # the executor given a client, over the engine's unit of work
        settings = settings_of(config)
        values = serial.returns.to_numpy()
        ends = np.arange(WINDOW - 1, len(values))
        jobs = [(values, ends[:10], settings, None), (values, ends[10:], settings, None)]
        executor = DaskExecutor(client=client)
        remote = list(executor.map(compute_batch, jobs))
        executor.close()
        local = list(SerialExecutor().map(compute_batch, jobs))
        for remote_batch, local_batch in zip(remote, local):
            for x, y in zip(remote_batch, local_batch):
                np.testing.assert_array_equal(x.used, y.used)
                np.testing.assert_array_equal(x.distances, y.distances)
                for dx, dy in zip(x.diagrams, y.diagrams):
                    np.testing.assert_array_equal(dx, dy)
        # the whole monitor through the configuration's scheduler address
        remote_config = _config(1, executor="dask", scheduler=cluster.scheduler_address)
        assert_same_result(monitor(prices, remote_config), serial)
