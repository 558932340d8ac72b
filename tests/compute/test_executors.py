"""Every executor gives the serial result, bit for bit.

The local process pool (forked workers, BLAS pinned, giotto-ph with one thread) and a Dask
cluster (a LocalCluster of worker processes, reached by its scheduler address through the
configuration and through ``riskshape run --executor dask --scheduler``) only change where
windows are computed.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from riskshape import Config, MonitorResult, monitor
from riskshape.cli import cli
from riskshape.compute.executors import DaskExecutor, ProcessExecutor, SerialExecutor, make_executor
from riskshape.config import ComputeConfig


def _prices(small_prices: pd.DataFrame) -> pd.DataFrame:
    return small_prices.iloc[:140]


def _config(**compute: object) -> Config:
    # engine "auto": giotto-ph where installed, as by default
    return Config(window=30, maxdim=1, compute={"batch_windows": 16, **compute})


def _assert_same(a: MonitorResult, b: MonitorResult) -> None:
    pd.testing.assert_frame_equal(a.features, b.features, check_exact=True)
    pd.testing.assert_frame_equal(a.left_out, b.left_out)
    for end in a.window_ends:
        assert a.assets(end) == b.assets(end)
        for dim in (0, 1):
            np.testing.assert_array_equal(a.diagram(end, dim), b.diagram(end, dim))


@pytest.fixture(scope="module")
def serial(small_prices: pd.DataFrame) -> MonitorResult:
    return monitor(_prices(small_prices), _config(executor="serial"))


def test_process_pool_equals_serial(small_prices: pd.DataFrame, serial: MonitorResult) -> None:
    pooled = monitor(_prices(small_prices), _config(executor="process", workers=2))
    _assert_same(pooled, serial)


def test_process_pool_is_the_default_and_sized_to_the_cores() -> None:
    assert Config().compute.executor == "process"
    executor = make_executor(ComputeConfig(), n_jobs=1000)
    try:
        cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1
        if cores > 1:
            assert isinstance(executor, ProcessExecutor) and executor.workers == cores
        else:
            assert isinstance(executor, SerialExecutor)
    finally:
        executor.close()
    # one job never starts a pool
    assert isinstance(make_executor(ComputeConfig(), n_jobs=1), SerialExecutor)


def _pool_blas_threads() -> int:
    from threadpoolctl import threadpool_info

    return max((pool["num_threads"] for pool in threadpool_info()), default=1)


def test_pool_workers_run_blas_on_one_thread() -> None:
    executor = ProcessExecutor(2)
    try:
        assert list(executor.map(_pool_blas_threads, [(), ()])) == [1, 1]
    finally:
        executor.close()


def test_spawned_workers_pin_blas_themselves(monkeypatch: pytest.MonkeyPatch) -> None:
    """Where fork is not used, each worker pins BLAS itself (forked workers inherit the parent's pin)."""
    from functools import partial

    from threadpoolctl import threadpool_info

    from riskshape.compute.batch import preload
    from riskshape.compute.monitor import settings_of

    monkeypatch.setattr("riskshape.compute.executors._start_method", lambda: "spawn")
    executor = ProcessExecutor(2, preload=partial(preload, settings_of(Config(window=30, maxdim=1))))
    try:
        infos = list(executor.map(threadpool_info, [(), ()]))
    finally:
        executor.close()
    for info in infos:
        blas = [pool for pool in info if pool["user_api"] == "blas"]
        assert blas, "numpy's BLAS is loaded in the worker"
        assert all(pool["num_threads"] == 1 for pool in blas)


_BLAS_AFTER_A_RUN = """
import numpy  # noqa: F401 (loads BLAS)
from threadpoolctl import threadpool_info
from riskshape.compute.executors import SerialExecutor, keep_blas_pinned
def blas_threads():
    return max(p["num_threads"] for p in threadpool_info() if p["user_api"] == "blas")
if {keep}:
    keep_blas_pinned()
before = blas_threads()
inside = list(SerialExecutor().map(blas_threads, [()]))[0]
print(before, inside, blas_threads())
"""


@pytest.mark.parametrize("keep", [False, True])
def test_blas_is_pinned_while_windows_run_and_for_good_where_asked(keep: bool) -> None:
    """A caller's process gets its BLAS threads back after a run; riskshape's own processes keep one.

    In a fresh process each: the pin is process-wide state.
    """
    import subprocess
    import sys

    done = subprocess.run(
        [sys.executable, "-c", _BLAS_AFTER_A_RUN.format(keep=keep)], capture_output=True, text=True, check=True
    )
    before, inside, after = (int(x) for x in done.stdout.split())
    assert inside == 1
    assert after == (1 if keep else before)


@pytest.fixture(scope="module")
def cluster() -> object:
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0", silence_logs=50
    ) as local:
        yield local


def test_dask_cluster_equals_serial(small_prices: pd.DataFrame, serial: MonitorResult, cluster: object) -> None:
    address = cluster.scheduler_address  # type: ignore[attr-defined]
    remote = monitor(_prices(small_prices), _config(executor="dask", scheduler=address))
    _assert_same(remote, serial)


def test_cli_run_on_a_dask_cluster_equals_serial(small_prices: pd.DataFrame, cluster: object, tmp_path: Path) -> None:
    prices_csv = tmp_path / "prices.csv"
    _prices(small_prices).rename_axis("date").to_csv(prices_csv)
    config_toml = tmp_path / "config.toml"
    config_toml.write_text("[monitor]\nwindow = 30\nmaxdim = 1\n\n[compute]\nbatch_windows = 16\n")
    runner = CliRunner()
    outputs = {}
    for name, options in {
        "serial": ["--executor", "serial"],
        "dask": ["--executor", "dask", "--scheduler", cluster.scheduler_address],  # type: ignore[attr-defined]
    }.items():
        out = tmp_path / name
        done = runner.invoke(
            cli, ["run", "--prices", str(prices_csv), "--config", str(config_toml), "--out", str(out), *options]
        )
        assert done.exit_code == 0, done.output
        outputs[name] = out
    features = {name: pd.read_parquet(out / "features.parquet") for name, out in outputs.items()}
    pd.testing.assert_frame_equal(features["dask"], features["serial"], check_exact=True)


def test_dask_executor_counts_the_cluster_threads(cluster: object) -> None:
    distributed = pytest.importorskip("distributed")
    with distributed.Client(cluster.scheduler_address) as client:  # type: ignore[attr-defined]
        assert DaskExecutor(client=client).workers == 2  # two worker processes of one thread


def test_blas_limits_found_once_until_an_import(monkeypatch: pytest.MonkeyPatch) -> None:
    """The libraries' controller is reused between runs and found again after an import (a new library maybe)."""
    import sys
    import types

    from riskshape.compute import executors

    first = executors._controller()
    assert executors._controller() is first
    monkeypatch.setitem(sys.modules, "riskshape_test_new_module", types.ModuleType("riskshape_test_new_module"))
    assert executors._controller() is not first


def test_blas_on_one_thread_inside_the_block_and_restored_after() -> None:
    """Inside a library caller's run BLAS has one thread, after it as many as before (threadpoolctl's own view)."""
    from threadpoolctl import threadpool_info

    from riskshape.compute import executors

    def blas_threads() -> list[int]:
        return [p["num_threads"] for p in threadpool_info() if p["user_api"] == "blas"]

    if executors._PIN_FOR_GOOD or executors._BLAS_PINNED:
        pytest.skip("this process keeps BLAS pinned for good")
    before = blas_threads()
    with executors._one_blas_thread():
        assert blas_threads() and set(blas_threads()) == {1}
    assert blas_threads() == before
