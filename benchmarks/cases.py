"""The benchmark cases: each returns rows of measured values.

Every case runs the things it compares in the same process, on the same data, one after the
other. Wall time (``time.perf_counter``) is what a user waits; CPU time (``getrusage`` of this
process and of its finished workers) is the work done, which other processes on a shared
machine do not inflate: a ratio of CPU times holds when the machine is busy, a ratio of wall
times only when it is not. Stage times (persistence, diagram distances) are CPU times from
wrappers placed around the two functions :func:`riskshape.compute.batch.compute_batch` calls for
them, in serial runs only.
"""

from __future__ import annotations

import resource
import statistics
import time
import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from functools import partial
from typing import Any

import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

import riskshape.compute.batch as window_module
from benchmarks.data import factor_prices, factor_returns
from riskshape import Config, monitor
from riskshape.compute.batch import compute_batch, preload
from riskshape.compute.distance import correlation_matrix, correlation_to_distance
from riskshape.compute.executors import ProcessExecutor, available_cores
from riskshape.compute.matching import assignment_wasserstein, persim_bottleneck
from riskshape.compute.monitor import _compute_windows, settings_of
from riskshape.compute.persistence import compute_diagrams
from riskshape.compute.returns import to_returns
from riskshape.compute.summaries import bottleneck_distance, wasserstein_distance
from riskshape.compute.windows import window_end_positions

__all__ = ["Row", "CASES"]


@dataclass
class Row:
    """One line of a section's table."""

    case: str
    values: dict[str, Any] = field(default_factory=dict)


@dataclass
class StageClock:
    """CPU seconds spent in persistence and in diagram distances."""

    persistence: float = 0.0
    distances: float = 0.0
    h1_bars: list[int] = field(default_factory=list)


@contextmanager
def stage_clock() -> Iterator[StageClock]:
    """Time (CPU) the persistence and distance calls of serial work done inside the block."""
    clock = StageClock()
    diagrams_fn, distances_fn = window_module.compute_diagrams, window_module.diagram_distances

    def timed_diagrams(*args: Any, **kwargs: Any) -> tuple[np.ndarray, ...]:
        start = time.process_time()
        out = diagrams_fn(*args, **kwargs)
        clock.persistence += time.process_time() - start
        if len(out) > 1:
            clock.h1_bars.append(len(out[1]))
        return out

    def timed_distances(*args: Any, **kwargs: Any) -> np.ndarray:
        start = time.process_time()
        out = distances_fn(*args, **kwargs)
        clock.distances += time.process_time() - start
        return out

    window_module.compute_diagrams, window_module.diagram_distances = timed_diagrams, timed_distances
    try:
        yield clock
    finally:
        window_module.compute_diagrams, window_module.diagram_distances = diagrams_fn, distances_fn


@dataclass
class Span:
    """Wall and CPU seconds of a block; CPU counts this process and its finished children."""

    wall: float = 0.0
    cpu: float = 0.0


# Releasing a BLAS pin (leaving threadpool_limits) wakes OpenBLAS threads that then spin for
# about 0.1 s; a span waits that long first, so one measured block's tail does not land in the
# next block's time on a 2-core machine (seen: 50 ms of a 0.65 s run).
SETTLE_SECONDS = 0.3


@contextmanager
def span() -> Iterator[Span]:
    """Measure the wall and CPU time of the block (after :data:`SETTLE_SECONDS` of rest)."""
    time.sleep(SETTLE_SECONDS)
    out = Span()
    wall, cpu = time.perf_counter(), _cpu_seconds()
    try:
        yield out
    finally:
        out.wall, out.cpu = time.perf_counter() - wall, _cpu_seconds() - cpu


def _serial(config: Config) -> Config:
    return config.replace(compute={"executor": "serial"})


def _warm_up() -> None:
    """Import every library once (imports would otherwise land in the first timing)."""
    settings = settings_of(Config(window=20, maxdim=1))
    preload(settings)
    returns = factor_returns(25, 80, seed=99)
    compute_batch(returns, np.arange(19, 25), settings)


def per_window_cost(quick: bool) -> list[Row]:
    """Serial CPU cost of one window against the number of assets and the window length (H0 and H1).

    CPU time (``time.process_time``), not wall time, so that other processes on the machine do
    not inflate it; BLAS pinned to one thread, as in the workers.
    """
    _warm_up()
    counts = {20: 40, 50: 30, 100: 20, 200: 10, 500: 5, 1000: 3}
    grid = [(n, w) for n in counts for w in (60, 250)] + [(100, w) for w in (20, 120, 500)]
    rows = []
    for n_assets, window in sorted(grid, key=lambda c: (c[1] != 60 and c[1] != 250, c[0], c[1])):
        count = max(2, counts[n_assets] // (3 if quick else 1))
        returns = factor_returns(window + count, n_assets, seed=n_assets + window)
        settings = settings_of(Config(window=window, maxdim=1))
        ends = np.arange(window - 1, window + count)
        with threadpool_limits(1), stage_clock() as clock, span() as spent:
            compute_batch(returns, ends, settings)
        total = spent.cpu
        per = 1e3 / len(ends)
        other = total - clock.persistence - clock.distances
        rows.append(
            Row(
                f"{n_assets} assets, window {window}",
                {
                    "CPU ms/window": total * per,
                    "persistence": clock.persistence * per,
                    "distances": clock.distances * per,
                    "other": other * per,
                    "other share": other / total,
                    "H1 bars": statistics.mean(clock.h1_bars),
                    "wall ms/window": spent.wall * per,
                },
            )
        )
    return rows


def calibration_ms() -> float:
    """Wall ms of one fixed reference computation (ripser, H0 and H1, a fixed 100-asset window).

    Taken at the start and at the end of a run: on a calm machine both are about the same, and
    about what benchmarks/README.md gives with its figures; a larger or drifting value says the
    machine was slowed by other work while the figures were measured.
    """
    from ripser import ripser

    returns = factor_returns(60, 100, seed=7)
    dist = correlation_to_distance(correlation_matrix(returns))
    best = np.inf
    with threadpool_limits(1):
        for _ in range(5):
            start = time.perf_counter()
            for _ in range(10):
                ripser(dist, maxdim=1, distance_matrix=True)
            best = min(best, (time.perf_counter() - start) / 10)
    return 1e3 * best


def _naive_loop(returns: np.ndarray, window: int, maxdim: int) -> int:
    """What a user would write with numpy, ripser and persim: one window at a time."""
    from persim import bottleneck, wasserstein
    from ripser import ripser

    previous = None
    for end in range(window - 1, len(returns)):
        corr = np.corrcoef(returns[end - window + 1 : end + 1], rowvar=False)
        dist = np.sqrt(np.clip(2.0 * (1.0 - corr), 0.0, None))
        dgms = [d[np.isfinite(d[:, 1])] for d in ripser(dist, maxdim=maxdim, distance_matrix=True)["dgms"]]
        lifetimes = [d[:, 1] - d[:, 0] for d in dgms]
        _ = [(life.sum(), -(life / life.sum() * np.log(life / life.sum())).sum()) for life in lifetimes if len(life)]
        if previous is not None:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                _ = [(wasserstein(a, b), bottleneck(a, b)) for a, b in zip(previous, dgms)]
        previous = dgms
    return len(returns) - window + 1


def naive_loop_vs_riskshape(quick: bool) -> list[Row]:
    """100 assets, window 60, step 1, H0 and H1: the naive loop against riskshape, same data."""
    _warm_up()
    n_windows, window, n_assets = (120 if quick else 400), 60, 100
    prices = factor_prices(window + n_windows, n_assets, seed=1)
    returns = to_returns(prices).to_numpy()
    config = Config(window=window, maxdim=1)

    with threadpool_limits(1), span() as naive:
        done = _naive_loop(returns, window, 1)
    with span() as pooled:
        _ = monitor(prices, config).features
    with stage_clock() as clock, span() as serial:
        serial_result = monitor(prices, _serial(config))
        _ = serial_result.features
    other = serial.cpu - clock.persistence - clock.distances
    # same bars as ripser on the last window (a check that the comparison is like for like)
    from ripser import ripser

    last = window_end_positions(len(returns), window, 1)[-1]
    corr = correlation_matrix(returns[last - window + 1 : last + 1])
    reference = ripser(correlation_to_distance(corr), maxdim=1, distance_matrix=True)["dgms"][1]
    assert len(reference) == len(serial_result.diagram(serial_result.window_ends[-1], 1))
    rows = [
        _timed_row("naive loop (numpy corrcoef, ripser, persim), 1 process", done, naive, None),
        _timed_row(f"riskshape, {available_cores()} processes (default)", done, pooled, naive),
        _timed_row("riskshape, serial", done, serial, naive, {"other share": other / serial.cpu}),
    ]
    if not quick:
        # a longer history (eight years of daily windows): the pool's start and stop cost less per window
        prices = factor_prices(window + 2000, n_assets, seed=6)
        returns = to_returns(prices).to_numpy()
        with threadpool_limits(1), span() as naive_long:
            done_long = _naive_loop(returns, window, 1)
        with span() as pooled_long:
            _ = monitor(prices, config).features
        rows += [
            _timed_row("naive loop, 2,000 windows", done_long, naive_long, None),
            _timed_row(f"riskshape, {available_cores()} processes, 2,000 windows", done_long, pooled_long, naive_long),
        ]
    return rows


def _timed_row(
    label: str, windows: int, spent: Span, baseline: Span | None, extra: dict[str, float] | None = None
) -> Row:
    values: dict[str, float] = {
        "windows": windows,
        "wall s": spent.wall,
        "CPU s": spent.cpu,
        "wall ms/window": 1e3 * spent.wall / windows,
    }
    if baseline is not None:
        values["speed-up (wall)"] = baseline.wall / spent.wall
        values["CPU ratio"] = baseline.cpu / spent.cpu
    values.update(extra or {})
    return Row(label, values)


def h0_vs_ripser(quick: bool) -> list[Row]:
    """H0-only monitoring of 500 assets against ripser at maxdim 0, same data.

    Two comparisons: the whole riskshape run (prices in, features out: selection, correlation,
    H0, distances, summaries, on the process pool) against a loop of numpy correlation and
    ripser at maxdim 0; and the persistence step alone, single linkage against ripser, on the
    same distance matrices (CPU time, one process).
    """
    from ripser import ripser

    from riskshape.compute.persistence import h0_from_single_linkage

    _warm_up()
    n_windows, window, n_assets = (60 if quick else 400), 250, 500
    prices = factor_prices(window + n_windows, n_assets, seed=2)
    returns = to_returns(prices).to_numpy()
    with threadpool_limits(1), span() as plain:
        for end in range(window - 1, len(returns)):
            corr = np.corrcoef(returns[end - window + 1 : end + 1], rowvar=False)
            ripser(np.sqrt(np.clip(2.0 * (1.0 - corr), 0.0, None)), maxdim=0, distance_matrix=True)
    with span() as ours:
        _ = monitor(prices, Config(window=window, maxdim=0)).features
    step_ripser = step_linkage = 0.0
    with threadpool_limits(1):
        for end in range(window - 1, len(returns), 4):
            dist = correlation_to_distance(correlation_matrix(returns[end - window + 1 : end + 1]))
            start = time.process_time()
            ripser(dist, maxdim=0, distance_matrix=True)
            step_ripser += time.process_time() - start
            start = time.process_time()
            h0_from_single_linkage(dist)
            step_linkage += time.process_time() - start
    steps = len(range(window - 1, len(returns), 4))
    return [
        _timed_row("ripser maxdim 0 (with numpy corrcoef), 1 process", n_windows, plain, None),
        _timed_row(
            f"riskshape maxdim 0 with distances and summaries, {available_cores()} processes", n_windows, ours, plain
        ),
        Row(
            f"persistence step only ({steps} windows, CPU)",
            {
                "ripser ms/window": 1e3 * step_ripser / steps,
                "single linkage ms/window": 1e3 * step_linkage / steps,
                "CPU ratio": step_ripser / step_linkage,
            },
        ),
    ]


def one_day_update(quick: bool) -> list[Row]:
    """Latency of adding one day to a monitored 100-asset portfolio (two years of history)."""
    _warm_up()
    days, window, n_assets, n_updates = 504, 60, 100, (5 if quick else 20)
    prices = factor_prices(days + n_updates, n_assets, seed=3)
    result = monitor(prices.iloc[: days + 1], Config(window=window, maxdim=1))
    _ = result.features
    updates, features = [], []
    for day in range(days + 1, days + 1 + n_updates):
        with span() as spent:
            result = result.update(prices.iloc[[day]])
        updates.append(spent)
        with span() as spent:
            _ = result.features
        features.append(spent)

    def summary(spans: list[Span]) -> dict[str, float]:
        return {
            "median wall ms": 1e3 * statistics.median(s.wall for s in spans),
            "max wall ms": 1e3 * max(s.wall for s in spans),
            "median CPU ms": 1e3 * statistics.median(s.cpu for s in spans),
        }

    return [
        Row(f"update(one day), {len(result.window_ends)} windows held", summary(updates)),
        Row("then .features (rebuilt over all windows)", summary(features)),
    ]


def _cpu_seconds() -> float:
    own, children = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def executor_run(variant: str, quick: bool) -> dict[str, float]:
    """The demo scenario (48 assets, about 1,240 windows, H0 and H1) on one executor; run it in a fresh process.

    ``variant``: ``serial``; ``pool`` (the default process pool: the parent imports the
    engine's libraries before forking); ``pool-no-preload`` (each worker imports them itself, as
    before: giotto-ph pulls in scikit-learn, about a second per process). Imports inside the
    run are timed (a fresh process has not made them yet), as a user's first run would pay them.
    """
    from riskshape.demo.scenario import generate_scenario

    prices = generate_scenario(n_days=500 if quick else None).prices
    config = Config()
    returns = to_returns(prices, config.returns).to_numpy()
    ends = window_end_positions(len(returns), config.window, config.step)
    settings = settings_of(config)
    with span() as spent:
        if variant == "serial":
            _compute_windows(returns, ends, _serial(config), None, None)
        else:
            loader = partial(preload, settings) if variant == "pool" else None
            executor = ProcessExecutor(available_cores(), preload=loader)
            try:
                _compute_windows(returns, ends, config, None, None, executor)
            finally:
                executor.close()  # joins the workers, so their CPU time counts as this process's children
    return {"windows": float(len(ends)), "wall s": spent.wall, "CPU s": spent.cpu}


def distance_solvers(quick: bool) -> list[Row]:
    """Plain against fast exact distances on diagrams of consecutive windows (ms per call)."""
    _warm_up()
    rows = []
    for n_assets, window in [(100, 60), (500, 250)]:
        returns = factor_returns(window + 1, n_assets, seed=4)
        a, b = (
            compute_diagrams(correlation_to_distance(correlation_matrix(returns[k : k + window])), 1) for k in (0, 1)
        )
        repeats = 2 if quick else 5
        for dim in (0, 1):
            x, y = a[dim], b[dim]
            timings = {
                "W plain (scipy assignment)": _best(partial(assignment_wasserstein, x, y, 1.0), repeats),
                "W fast": _best(partial(wasserstein_distance, x, y, 1.0), repeats),
                "B plain (persim)": _best(partial(persim_bottleneck, x, y), repeats),
                "B fast": _best(partial(bottleneck_distance, x, y), repeats),
            }
            assert abs(wasserstein_distance(x, y) - assignment_wasserstein(x, y, 1.0)) < 1e-9
            assert abs(bottleneck_distance(x, y) - persim_bottleneck(x, y)) < 1e-12
            rows.append(Row(f"H{dim}, {n_assets} assets, window {window} ({len(x)} bars)", timings))
    return rows


def _best(fn: Callable[[], object], repeats: int) -> float:
    best = np.inf
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return 1e3 * best


def large_run(n_windows: int, n_assets: int, window: int) -> dict[str, float]:
    """One monitor run, in a fresh process: wall time and peak resident memory."""
    prices = factor_prices(window + n_windows, n_assets, seed=5)
    with span() as spent:
        result = monitor(prices, Config(window=window, maxdim=1))
        features = result.features
    kib = 1024.0  # ru_maxrss is in KiB on Linux
    own = resource.getrusage(resource.RUSAGE_SELF)
    return {
        "windows": float(len(features)),
        "wall s": spent.wall,
        "CPU s": spent.cpu,
        "of which parent CPU s": own.ru_utime + own.ru_stime,
        "parent peak MiB": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / kib,
        "largest worker peak MiB": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / kib,
        "prices MiB": prices.memory_usage(deep=True).sum() / 2**20,
        "all correlation matrices would take GiB": len(features) * n_assets * n_assets * 8 / 2**30,
        "diagram storage MiB": sum(w.bars.nbytes for w in result.windows) / 2**20,
    }


CASES: dict[str, Callable[[bool], list[Row]]] = {
    "per-window cost": per_window_cost,
    "naive loop against riskshape": naive_loop_vs_riskshape,
    "H0 only against ripser maxdim 0": h0_vs_ripser,
    "one-day update": one_day_update,
    "distance solvers": distance_solvers,
}


def frame(rows: list[Row]) -> pd.DataFrame:
    """A section's rows as a table."""
    return pd.DataFrame([row.values for row in rows], index=[row.case for row in rows])


@contextmanager
def _stage_clock_on_cpu() -> Iterator[None]:
    """Profile a serial run on this process's CPU clock instead of ``perf_counter``.

    On a busy machine the wall clock charges each stage the time it waited for a core, which
    inflates the long stages (persistence) most; the CPU clock of a serial run does not.
    """
    import types

    import riskshape.compute.monitor as monitor_module
    import riskshape.compute.stages as stages_module

    cpu_clock = types.SimpleNamespace(perf_counter=time.process_time)
    saved = stages_module.time, monitor_module.time
    stages_module.time = monitor_module.time = cpu_clock  # type: ignore[assignment]
    try:
        yield
    finally:
        stages_module.time, monitor_module.time = saved


def engine_floor(quick: bool) -> list[Row]:
    """Serial ``monitor`` against the persistence alone of the backend it used, and the pool.

    For each size: the distance matrices of every window are computed first, then timed: the
    Rips backend alone on them (``compute_diagrams``, what no engine can avoid); ``monitor``
    serially, prices in, features out; the same with ``baselines=True`` (the baselines' share of
    the serial CPU); ``monitor`` on the default process pool. Each in this
    process, one after the other, best of ``repeats`` CPU (serial) or wall (pool) times. The
    profiled run's split (:mod:`riskshape.compute.stages`, on the CPU clock: a serial run) shows
    where the rest goes.
    """
    from riskshape.compute.persistence import resolve_backend

    _warm_up()
    rows = []
    sizes = [(50, 60, 541), (100, 60, 541), (300, 250, 201)]
    repeats = 1 if quick else 2
    for n_assets, window, n_windows in sizes:
        if quick:
            n_windows = max(60, n_windows // 4)
        prices = factor_prices(window + n_windows, n_assets, seed=n_assets)
        config = Config(window=window, maxdim=1)
        returns = to_returns(prices, config.returns).to_numpy()
        ends = window_end_positions(len(returns), window, 1)
        matrices = [correlation_to_distance(correlation_matrix(returns[e - window + 1 : e + 1])) for e in ends]
        floor = serial = pool_wall = serial_wall = with_baselines = np.inf
        for _ in range(repeats):
            with threadpool_limits(1), span() as spent:
                for matrix in matrices:
                    compute_diagrams(matrix, 1, "auto")
            # leaving threadpool_limits wakes BLAS threads that spin: let them settle (span waits)
            floor = min(floor, spent.cpu)
            with span() as spent:
                _ = monitor(prices, _serial(config)).features
            serial, serial_wall = min(serial, spent.cpu), min(serial_wall, spent.wall)
            with span() as spent:
                _ = monitor(prices, _serial(config), baselines=True).features
            with_baselines = min(with_baselines, spent.cpu)
            with span() as spent:
                _ = monitor(prices, config).features
            pool_wall = min(pool_wall, spent.wall)
        with _stage_clock_on_cpu():
            profiled = monitor(prices, _serial(config), profile=True).stage_times
        assert profiled is not None
        stage_total = profiled.total
        values: dict[str, Any] = {
            "backend": resolve_backend("auto"),
            "windows": len(ends),
            "persistence alone CPU s": floor,
            "monitor serial CPU s": serial,
            "serial / persistence": serial / floor,
            "baselines: extra CPU / serial": with_baselines / serial - 1.0,
            "pool wall s": pool_wall,
            "pool speed-up (wall)": serial_wall / pool_wall,
        }
        for name, seconds, _share in profiled.rows():
            if name != "writing":
                values[f"{name} / persistence"] = seconds / profiled.persistence
        values["profiled stages / persistence"] = stage_total / profiled.persistence
        rows.append(Row(f"{n_assets} assets, window {window}", values))
    return rows
