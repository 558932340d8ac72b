"""The correlation distance d = sqrt(2 (1 - rho)) is a metric on every window the engine builds.

Source: Mantegna 1999 (Eur. Phys. J. B 11:193): d_ij is the Euclidean distance between the
standardised return vectors z_i = (x_i - mean) / (std * sqrt(T)), hence a (pseudo)metric whenever
rho is a correlation matrix of actual vectors. Reference for that identity:
``scipy.spatial.distance.pdist`` on the standardised columns. Spearman is Pearson on ranks,
the same argument applies to the rank vectors.

Returns are drawn by hypothesis on a tick grid (multiples of 1e-3, as prices quoted in ticks
give), so ties, constant columns, duplicate and opposite columns all occur; missing cells are
handled by the coverage policy (riskshape.compute.windows.select_assets) before the correlation.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.spatial.distance import pdist, squareform

from riskshape.compute.distance import correlation_matrix, correlation_to_distance
from riskshape.compute.windows import select_assets

TOL = 1e-7  # float64 rounding of sqrt(2 (1 - rho)) near rho = 1 is ~1e-8


@st.composite
def return_windows(draw: st.DrawFn) -> tuple[np.ndarray, float]:
    days = draw(st.integers(5, 30))
    assets = draw(st.integers(2, 8))
    ticks = draw(arrays(np.int64, (days, assets), elements=st.integers(-40, 40)))
    block = ticks.astype(float) * 1e-3
    if draw(st.booleans()):  # a duplicate and an opposite column: d = 0 and d = 2
        block[:, -1] = block[:, 0]
        if assets > 2:
            block[:, -2] = -block[:, 0]
    missing_rate = draw(st.sampled_from([0.0, 0.1, 0.3]))
    block[draw(arrays(np.float64, (days, assets), elements=st.floats(0, 1))) < missing_rate] = np.nan
    coverage = draw(st.sampled_from([0.5, 0.8, 0.9, 1.0]))
    return block, coverage


def _check_metric(distance: np.ndarray) -> None:
    n = len(distance)
    assert distance.shape == (n, n)
    assert np.all(np.isfinite(distance))
    np.testing.assert_array_equal(distance, distance.T)  # symmetry
    np.testing.assert_array_equal(np.diag(distance), 0.0)  # zero diagonal
    assert distance.min() >= 0.0 and distance.max() <= 2.0
    # triangle inequality d_ik <= d_ij + d_jk for every triple
    slack = distance[:, None, :] - (distance[:, :, None] + distance[None, :, :])
    assert slack.max() <= TOL, slack.max()


@settings(max_examples=40, deadline=None)
@given(return_windows(), st.sampled_from(["pearson", "spearman"]))
def test_correlation_distance_is_a_metric(window: tuple[np.ndarray, float], method: str) -> None:
    block, coverage = window
    selection = select_assets(block, coverage)
    # every column is accounted for: admitted or left out with a reason
    assert sorted(selection.used.tolist() + [j for j, _ in selection.left_out]) == list(range(block.shape[1]))
    assert not np.isnan(selection.block).any()
    if len(selection.used) < 2:
        return
    corr = correlation_matrix(selection.block, method)  # type: ignore[arg-type]
    distance = correlation_to_distance(corr)
    _check_metric(distance)

    # Mantegna's identity: d is the Euclidean distance of the standardised (rank) columns
    data = selection.block
    if method == "spearman":
        from scipy.stats import rankdata

        data = rankdata(data, axis=0)
    z = (data - data.mean(axis=0)) / (data.std(axis=0) * np.sqrt(len(data)))
    np.testing.assert_allclose(distance, squareform(pdist(z.T)), atol=1e-6)
