"""The two Vietoris-Rips backends give the same run, bit for bit; gudhi confirms the diagrams.

Consecutive windows of the fictional scenario (gaps, a late-listed asset, running-sum
correlations) are run end to end with ``rips_backend="ripser"`` (ripser.py) and
``rips_backend="giotto"`` (giotto-ph's ``ripser_parallel``): both run ripser's algorithm on the
same float32 values, so every bar, summary and distance to the previous window must be equal
exactly, not within a tolerance. The outside reference for the diagrams themselves is gudhi's
``RipsComplex`` (Z/2 coefficients like ripser; computed in float64, so compared with rtol 1e-6,
the size of a float32 rounding).
"""

from __future__ import annotations

import gudhi
import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.compute.persistence import resolve_backend

pytest.importorskip("gph")


@pytest.fixture(scope="module")
def runs(small_prices: pd.DataFrame) -> dict[str, object]:
    base = dict(window=40, step=1, maxdim=1, compute={"executor": "serial"})
    return {backend: monitor(small_prices, Config(**base, rips_backend=backend)) for backend in ("ripser", "giotto")}


def test_auto_picks_giotto_where_it_is_installed() -> None:
    assert resolve_backend("auto") == "giotto"


def test_diagrams_summaries_and_distances_are_bit_identical(runs: dict) -> None:
    plain, fast = runs["ripser"], runs["giotto"]
    assert len(plain.windows) == len(fast.windows) > 100
    h1_bars = 0
    for a, b in zip(plain.windows, fast.windows):
        assert a.sizes == b.sizes
        assert a.bars.dtype == b.bars.dtype
        np.testing.assert_array_equal(a.bars, b.bars)
        np.testing.assert_array_equal(a.summaries, b.summaries)
        np.testing.assert_array_equal(a.distances, b.distances)
        h1_bars += a.sizes[1]
    assert h1_bars > 100  # the windows have loops to compare
    pd.testing.assert_frame_equal(plain.features, fast.features, check_exact=True)


def _gudhi_bars(distance: np.ndarray, dim: int) -> np.ndarray:
    tree = gudhi.RipsComplex(distance_matrix=distance).create_simplex_tree(max_dimension=2)
    tree.compute_persistence(homology_coeff_field=2, min_persistence=0.0)
    bars = np.asarray(tree.persistence_intervals_in_dimension(dim), dtype=float).reshape(-1, 2)
    bars = bars[np.isfinite(bars[:, 1]) & (bars[:, 1] > bars[:, 0])]
    return bars[np.lexsort((bars[:, 0], bars[:, 1]))]


def test_diagrams_of_consecutive_windows_equal_gudhis(runs: dict) -> None:
    fast = runs["giotto"]
    for end in fast.window_ends[:12]:
        window = fast.window(end)
        for dim in (0, 1):
            ours = fast.diagram(end, dim)
            reference = _gudhi_bars(window.distance, dim)
            assert ours.shape == reference.shape, (end, dim)
            np.testing.assert_allclose(ours, reference, rtol=1e-6, atol=0)
