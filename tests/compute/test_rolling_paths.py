"""Incremental rolling correlation and compact diagram storage equal the plain path.

Plain path: ``numpy.corrcoef`` on each window (riskshape.compute.distance.correlation_matrix) and
float64 diagrams straight from the persistence engine. The rolling path may differ from it by
float64 rounding in the correlations, hence by float32 rounding in the diagrams (the engines
round distances to float32; a distance within 1e-15 of a float32 rounding boundary can land on
the other side).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.compute.batch import WindowResult, compute_batch
from riskshape.compute.distance import correlation_matrix
from riskshape.compute.moments import RECOMPUTE_EVERY, RollingMoments, is_rebuild_point
from riskshape.compute.monitor import settings_of
from riskshape.compute.persistence import compute_diagrams
from riskshape.compute.windows import window_end_positions

FLOAT32_STEP = 2.0**-22  # two float32 ulps at values in [1, 2), the range of correlation distances


def _returns(rng: np.random.Generator, days: int, assets: int, gaps: bool) -> np.ndarray:
    common = rng.standard_normal(days)[:, None] * rng.uniform(0.3, 1.0, assets)
    values = 0.01 * (common + rng.standard_normal((days, assets))) + 0.0005
    if gaps:
        values[rng.integers(0, days, 4), rng.integers(0, assets, 4)] = np.nan
        values[:40, -1] = np.nan  # a late listing
    return values


def test_running_sums_track_corrcoef_and_missing_counts(rng: np.random.Generator) -> None:
    window, values = 30, _returns(rng, 900, 12, gaps=True)
    moments = RollingMoments(values[:window])
    checked = 0
    for start in range(1, len(values) - window + 1):
        moments.slide(values[start - 1 : start], values[start + window - 1 : start + window])
        block = values[start : start + window]
        complete = ~np.isnan(block).any(axis=0)
        for j in range(values.shape[1]):
            assert moments.complete(np.array([j])) == complete[j]
        columns = np.flatnonzero(complete)
        if len(columns) >= 2:
            expected = correlation_matrix(block[:, columns])
            np.testing.assert_allclose(moments.correlation(columns), expected, rtol=0, atol=1e-12)
            checked += 1
    assert checked > 800  # hundreds of slides without a rebuild: drift stays at rounding level


def test_rebuild_points_do_not_depend_on_batches() -> None:
    points = [k for k in range(300) if is_rebuild_point(k)]
    assert points[:3] == [0, RECOMPUTE_EVERY - 1, 2 * RECOMPUTE_EVERY - 1]
    assert all(b - a == RECOMPUTE_EVERY for a, b in zip(points[1:], points[2:]))


@pytest.mark.parametrize("gaps", [False, True])
@pytest.mark.parametrize("step", [1, 2])
def test_batch_with_running_sums_equals_plain_batch(
    rng: np.random.Generator, monkeypatch: pytest.MonkeyPatch, gaps: bool, step: int
) -> None:
    values = _returns(rng, 260, 25, gaps)
    config = Config(window=40, step=step, maxdim=1, rips_backend="ripser", min_coverage=0.9)
    settings = settings_of(config)
    plain_settings = type(settings)(**{**settings.__dict__, "rolling": False})
    ends = window_end_positions(len(values), config.window, config.step)

    used_sums = []
    original = RollingMoments.correlation

    def spy(self: RollingMoments, columns: np.ndarray) -> np.ndarray | None:
        corr = original(self, columns)
        used_sums.append(corr is not None)
        return corr

    monkeypatch.setattr(RollingMoments, "correlation", spy)
    fast = compute_batch(values, ends, settings)
    plain = compute_batch(values, ends, plain_settings)
    # the running sums served exactly the windows where no admitted asset missed a return
    complete = [
        not np.isnan(values[end - config.window + 1 : end + 1][:, result.used]).any()
        for end, result in zip(ends, plain)
    ]
    assert sum(used_sums) == sum(complete) > 20

    for x, y in zip(fast, plain):
        np.testing.assert_array_equal(x.used, y.used)
        assert x.left_out == y.left_out
        assert x.mean_correlation == pytest.approx(y.mean_correlation, rel=0, abs=1e-12)
        for dx, dy in zip(x.diagrams, y.diagrams):
            assert dx.shape == dy.shape
            np.testing.assert_allclose(dx, dy, rtol=0, atol=FLOAT32_STEP)
        np.testing.assert_allclose(x.distances, y.distances, rtol=0, atol=len(values) * FLOAT32_STEP, equal_nan=True)


def test_batching_does_not_change_a_bit(small_prices: pd.DataFrame) -> None:
    prices = small_prices.iloc[:150]
    base = Config(window=30, maxdim=1, rips_backend="ripser", compute={"executor": "serial", "batch_windows": 64})
    one = monitor(prices, base)
    other = monitor(prices, base.replace(compute={"executor": "serial", "batch_windows": 7}))
    pd.testing.assert_frame_equal(one.features, other.features, check_exact=True)
    for end in one.window_ends:
        for dim in (0, 1):
            np.testing.assert_array_equal(one.diagram(end, dim), other.diagram(end, dim))


def test_compact_storage_is_lossless(rng: np.random.Generator) -> None:
    values = _returns(rng, 60, 15, gaps=False)
    diagrams = compute_diagrams(1.0 - correlation_matrix(values), 1, "ripser")
    stored = WindowResult(np.arange(15), (), 0.1, diagrams, np.full((2, 2), np.nan))
    assert stored.bars.dtype == np.float32
    for kept, original in zip(stored.diagrams, diagrams):
        assert kept.dtype == np.float64
        np.testing.assert_array_equal(kept, original)
    # values that are not float32 numbers are kept as they are
    precise = (np.array([[0.0, 0.1], [0.0, 0.3]]),)
    exact = WindowResult(np.arange(2), (), 0.1, precise, np.full((1, 2), np.nan))
    np.testing.assert_array_equal(exact.diagrams[0], precise[0])


def test_a_result_holds_diagrams_not_matrices(small_prices: pd.DataFrame) -> None:
    result = monitor(small_prices, Config(window=30, maxdim=1, compute={"executor": "serial"}))
    n_assets = small_prices.shape[1]
    for window in result.windows:
        arrays = [v for v in vars(window).values() if isinstance(v, np.ndarray)]
        assert all(a.ndim <= 2 and a.size < n_assets * n_assets for a in arrays if a is not window.bars)
        assert window.bars.shape[1] == 2


def test_summaries_at_once_equal_the_functions_one_by_one(rng: np.random.Generator) -> None:
    from riskshape.compute.summaries import (
        SUMMARY_NAMES,
        landscape_norm,
        persistent_entropy,
        summarize_diagram,
        total_persistence,
    )

    births = rng.uniform(0.0, 1.0, 5)
    for dgm in (np.column_stack([births, births + rng.uniform(0.1, 0.5, 5)]), np.empty((0, 2))):
        summary = summarize_diagram(dgm)
        assert summary.as_tuple() == tuple(getattr(summary, name) for name in SUMMARY_NAMES)
        assert summary.as_tuple() == (
            len(dgm),
            total_persistence(dgm),
            persistent_entropy(dgm),
            landscape_norm(dgm, 1.0),
            landscape_norm(dgm, 2.0),
        )
