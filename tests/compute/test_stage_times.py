"""Profiled runs: the same results, and time charged to every stage where it was spent."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.compute.batch import compute_batch, compute_batch_profiled
from riskshape.compute.monitor import settings_of
from riskshape.compute.stages import NO_CLOCK, STAGE_NAMES, StageClock, StageTimes


def test_profiled_batch_equals_the_batch(small_prices: pd.DataFrame) -> None:
    settings = settings_of(Config(window=20, maxdim=1))
    rows = np.log(small_prices.to_numpy()[1:] / small_prices.to_numpy()[:-1])
    ends = np.arange(19, 60)
    plain = compute_batch(rows, ends, settings)
    timed, times = compute_batch_profiled(rows, ends, settings)
    for a, b in zip(plain, timed):
        np.testing.assert_array_equal(a.bars, b.bars)
        np.testing.assert_array_equal(a.summaries, b.summaries)
        np.testing.assert_array_equal(a.distances, b.distances)
    for stage in ("correlation", "distance_matrix", "persistence", "summaries", "distances"):
        assert getattr(times, stage) > 0, stage
    assert times.handoff == 0 and times.writing == 0  # the parent's stages, not the batch's


@pytest.mark.parametrize("executor", ["serial", "process"])
def test_profiled_run_sums_the_workers_stages(small_prices: pd.DataFrame, executor: str) -> None:
    config = Config(window=20, compute={"executor": executor, "workers": 2, "batch_windows": 16})
    plain = monitor(small_prices, config)
    timed = monitor(small_prices, config, profile=True)
    pd.testing.assert_frame_equal(plain.features, timed.features, check_exact=True)
    assert plain.stage_times is None
    times = timed.stage_times
    assert times is not None and times.persistence > 0 and times.handoff >= 0
    assert abs(times.total - sum(seconds for _, seconds, _ in times.rows())) < 1e-12
    assert sum(share for _, _, share in times.rows()) == pytest.approx(1.0)


def test_stage_times_add_stage_by_stage() -> None:
    a = StageTimes(persistence=1.0, distances=0.5)
    b = StageTimes(persistence=2.0, writing=0.25)
    total = a + b
    assert (total.persistence, total.distances, total.writing) == (3.0, 0.5, 0.25)
    assert total.with_stage("handoff", 0.5).total == pytest.approx(4.25)
    assert StageTimes().rows() == [(name, 0.0, 0.0) for name in STAGE_NAMES]


def test_the_clock_charges_intervals_and_the_null_clock_nothing() -> None:
    clock = StageClock()
    sum(range(10_000))
    clock.mark("persistence")
    clock.mark("distances")
    times = clock.times()
    assert times.persistence > 0 and times.distances >= 0 and times.summaries == 0
    NO_CLOCK.mark("persistence")
    assert NO_CLOCK.times().total == 0
