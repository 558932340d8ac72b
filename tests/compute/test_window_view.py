"""One window opened up (``MonitorResult.window``) against what the monitor computed and outside references.

References: the correlation distance sqrt(2 (1 - rho)) is Mantegna (1999, Eur. Phys. J. B
11:193); the Pearson correlation is pandas' ``DataFrame.corr``; the point-cloud distances are
scikit-learn's ``pairwise_distances`` (Euclidean), after its ``StandardScaler`` where the cloud
is standardised; the Vietoris-Rips diagrams are gudhi's ``RipsComplex`` (Z/2 coefficients, like
ripser; our diagrams are float32-rounded, so rtol 1e-6); the coverage policy (missing returns set
to the asset's window mean) is the one stated in :mod:`riskshape.compute.windows`, rebuilt here
with pandas' ``fillna``.
"""

from __future__ import annotations

import gudhi
import numpy as np
import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st
from sklearn.metrics import pairwise_distances
from sklearn.preprocessing import StandardScaler

from riskshape import Config, monitor
from riskshape.compute.batch import compute_window
from riskshape.compute.monitor import MonitorResult, settings_of
from riskshape.compute.persistence import compute_diagrams
from riskshape.compute.windows import (
    is_on_grid,
    select_window,
    window_end_positions,
    window_end_row,
    window_index,
    window_rows,
)
from riskshape.errors import DataError


def _gudhi_diagrams(distance: np.ndarray, maxdim: int) -> list[np.ndarray]:
    """Finite, positive-length bars per dimension from gudhi's Rips complex, sorted by (death, birth)."""
    tree = gudhi.RipsComplex(distance_matrix=distance).create_simplex_tree(max_dimension=maxdim + 1)
    tree.compute_persistence(homology_coeff_field=2, min_persistence=0.0)
    out = []
    for dim in range(maxdim + 1):
        bars = np.asarray(tree.persistence_intervals_in_dimension(dim), dtype=float).reshape(-1, 2)
        bars = bars[np.isfinite(bars[:, 1]) & (bars[:, 1] > bars[:, 0])]
        out.append(_sorted(bars))
    return out


def _sorted(bars: np.ndarray) -> np.ndarray:
    bars = np.asarray(bars, dtype=float).reshape(-1, 2)
    return bars[np.lexsort((bars[:, 0], bars[:, 1]))]


@pytest.fixture(scope="module", params=["correlation", "point_cloud"])
def run(request: pytest.FixtureRequest, small_prices: pd.DataFrame) -> MonitorResult:
    """The small scenario (gaps and a late-listing asset) under each embedding, running sums on."""
    config = Config(window=20, step=1, embedding=request.param, compute={"executor": "serial"})
    return monitor(small_prices, config)


def _ends_with_gaps(run: MonitorResult) -> list[pd.Timestamp]:
    """Window ends with an asset left out and an admitted asset whose missing returns were imputed."""
    left = set(run.left_out["window_end"])
    return [end for end in run.window_ends if end in left and run.window_returns(end).isna().to_numpy().any()]


def test_window_hands_out_what_the_monitor_computed(run: MonitorResult) -> None:
    gappy = _ends_with_gaps(run)
    assert gappy, "the scenario should give windows with an asset left out and one imputed"
    ends = [run.window_ends[0], gappy[0], gappy[-1], run.window_ends[-1]]
    for end in ends:
        window = run.window(end)
        assert window.end == end
        assert window.assets == tuple(str(a) for a in run.assets(end))
        expected_left = run.left_out[run.left_out["window_end"] == end]
        assert window.left_out == tuple(zip(expected_left["asset"], expected_left["reason"]))
        pd.testing.assert_frame_equal(window.returns, run.window_returns(end))
        for k in range(run.config.maxdim + 1):
            np.testing.assert_array_equal(window.diagrams[k], run.diagram(end, k))


def test_window_block_is_the_coverage_policy_imputation(run: MonitorResult) -> None:
    end = _ends_with_gaps(run)[0]
    window = run.window(end)
    # the policy of riskshape.compute.windows: each missing return set to its asset's window mean
    filled = window.returns.fillna(window.returns.mean())
    np.testing.assert_allclose(window.block, filled.to_numpy(), rtol=1e-12, atol=0.0)
    assert not np.isnan(window.block).any()


def test_window_matrices_match_the_references(run: MonitorResult) -> None:
    for end in (_ends_with_gaps(run)[0], run.window_ends[-1]):
        window = run.window(end)
        block = pd.DataFrame(window.block)
        corr = block.corr().to_numpy()  # pandas' Pearson
        np.testing.assert_allclose(window.correlation, corr, rtol=0.0, atol=1e-12)
        if run.config.embedding == "correlation":
            mantegna = np.sqrt(np.clip(2.0 * (1.0 - corr), 0.0, 4.0))  # Mantegna (1999)
            np.fill_diagonal(mantegna, 0.0)
            np.testing.assert_allclose(window.distance, mantegna, rtol=0.0, atol=1e-7)
            assert window.distance.shape == (len(window.assets), len(window.assets))
        else:
            points = window.block
            if run.config.standardize_cloud:
                points = StandardScaler().fit_transform(points)  # scikit-learn: zero mean, unit variance
            expected = pairwise_distances(points)  # scikit-learn, Euclidean between days
            np.testing.assert_allclose(window.distance, expected, rtol=1e-12, atol=1e-15)
            assert window.distance.shape == (run.config.window, run.config.window)


def test_window_distance_gives_the_monitors_diagrams(run: MonitorResult) -> None:
    maxdim = run.config.maxdim
    checked_h1 = 0
    for end in (_ends_with_gaps(run)[0], run.window_ends[10], run.window_ends[-1]):
        window = run.window(end)
        reference = _gudhi_diagrams(window.distance, maxdim)  # gudhi's Vietoris-Rips
        for k in range(maxdim + 1):
            ours = _sorted(window.diagrams[k])
            assert ours.shape == reference[k].shape, (end, k)
            np.testing.assert_allclose(ours, reference[k], rtol=1e-6, atol=1e-7)
        checked_h1 += len(window.diagrams[1])
        # the engine's plain path on the window's rows (running sums agree with it to rounding)
        rows = run.returns.to_numpy()[window_rows(run.returns.index.get_loc(end), run.config.window)]
        again = compute_window(rows, settings_of(run.config))
        for k in range(maxdim + 1):
            np.testing.assert_allclose(again.diagrams[k], window.diagrams[k], rtol=1e-6, atol=1e-7)
    assert checked_h1 > 0  # H1 bars were compared, not only H0


@pytest.mark.parametrize("embedding", ["correlation", "point_cloud"])
def test_window_distance_is_the_engines_input_bit_for_bit(small_prices: pd.DataFrame, embedding: str) -> None:
    # step 15 of 20: no running sums, so the engine took the plain estimator the window uses
    config = Config(window=20, step=15, embedding=embedding, compute={"executor": "serial"})
    result = monitor(small_prices, config)
    assert not result.left_out.empty  # the late-listing asset is left out of every window
    for end in result.window_ends:
        window = result.window(end)
        diagrams = compute_diagrams(window.distance, config.maxdim, config.rips_backend)
        for k in range(config.maxdim + 1):
            np.testing.assert_array_equal(diagrams[k], window.diagrams[k])


def test_window_for_a_date_without_one_names_the_range(run: MonitorResult) -> None:
    with pytest.raises(DataError, match="no window ends on"):
        run.window(run.returns.index[0])


def test_point_cloud_window_labels_its_days(small_prices: pd.DataFrame) -> None:
    config = Config(window=20, step=5, embedding="point_cloud", compute={"executor": "serial"})
    result = monitor(small_prices, config)
    window = result.window(result.window_ends[2])
    assert window.days == tuple(d.date().isoformat() for d in window.returns.index)
    assert len(window.days) == window.distance.shape[0] == config.window


@given(window=st.integers(1, 40), step=st.integers(1, 12), n_returns=st.integers(1, 200))
def test_window_index_arithmetic_inverts_on_the_grid(window: int, step: int, n_returns: int) -> None:
    ends = window_end_positions(n_returns, window, step)
    for index, end in enumerate(ends.tolist()):
        assert window_index(end, window, step) == index
        assert window_end_row(index, window, step) == end
        assert is_on_grid(end, window, step)
        rows = np.arange(n_returns)[window_rows(end, window)]
        assert len(rows) == window and rows[-1] == end  # causal: nothing after the end
    off_grid = [e for e in range(window - 1, n_returns) if e not in set(ends.tolist())]
    for end in off_grid:
        assert not is_on_grid(end, window, step)
        assert window_end_row(window_index(end, window, step), window, step) < end


def test_select_window_cuts_the_rows_the_monitor_uses(run: MonitorResult) -> None:
    end = _ends_with_gaps(run)[0]
    row = run.returns.index.get_loc(end)
    selection = select_window(run.returns.to_numpy(), row, run.config.window, run.config.min_coverage)
    window = run.window(end)
    assert tuple(str(run.returns.columns[j]) for j in selection.used) == window.assets
    np.testing.assert_array_equal(selection.block, window.block)
