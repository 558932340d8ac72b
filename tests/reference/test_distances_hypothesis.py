"""The engine's exact diagram distances against three outside solvers, on drawn and real diagrams.

References (conventions as in ``test_diagram_distances.py``: order p, L-infinity ground metric, a
point's cost to the diagonal is half its lifetime):

* POT's exact optimal transport (``ot.emd2``, network simplex) on the textbook augmented problem:
  each diagram gets one diagonal copy per point of the other, diagonal to diagonal costs 0
  (Kerber, Morozov and Nigmetov 2017, section 2, from memory);
* gudhi's ``gudhi.wasserstein.wasserstein_distance`` (POT underneath, ``internal_p=inf``);
* gudhi's ``gudhi.hera.wasserstein_distance`` (Hera's auction, relative error ``delta``) and
  ``gudhi.hera.bottleneck_distance`` with ``delta=0`` (exact);
* persim's exact ``bottleneck``.

Diagrams are drawn by hypothesis: empty ones, H0-like ones (births all 0, the engine's sorted
path), and points on a coarse grid, so that costs tie often (ties decide which candidate
threshold or which sorted matching the fast paths take).
"""

from __future__ import annotations

import numpy as np
import ot
import pandas as pd
import pytest
from gudhi.hera import bottleneck_distance as hera_bottleneck
from gudhi.hera import wasserstein_distance as hera_wasserstein
from gudhi.wasserstein import wasserstein_distance as gudhi_wasserstein
from hypothesis import given, settings
from hypothesis import strategies as st
from persim import bottleneck as persim_bottleneck

from riskshape import Config, monitor
from riskshape.compute.summaries import bottleneck_distance, wasserstein_distance

TOL = 1e-9


@st.composite
def diagrams(draw: st.DrawFn) -> np.ndarray:
    """A diagram of 0 to 14 finite bars of positive length; grid values make ties likely."""
    n = draw(st.integers(0, 14))
    grid = draw(st.booleans())
    h0 = draw(st.booleans())
    if grid:
        births = [0] * n if h0 else draw(st.lists(st.integers(0, 6), min_size=n, max_size=n))
        lives = draw(st.lists(st.integers(1, 6), min_size=n, max_size=n))
        scale = 0.125
    else:
        value = st.floats(0.0, 2.0, allow_nan=False, allow_infinity=False)
        births = [0.0] * n if h0 else draw(st.lists(value, min_size=n, max_size=n))
        lives = draw(st.lists(st.floats(1e-3, 1.5), min_size=n, max_size=n))
        scale = 1.0
    birth = np.asarray(births, dtype=float) * scale
    return np.column_stack([birth, birth + np.asarray(lives, dtype=float) * scale]).reshape(-1, 2)


def _pot_wasserstein(a: np.ndarray, b: np.ndarray, order: float) -> float:
    """The augmented transport problem solved by POT's exact network simplex."""
    n, m = len(a), len(b)
    if n + m == 0:
        return 0.0
    cost = np.zeros((n + m, m + n))
    pair = np.maximum(np.abs(a[:, None, 0] - b[None, :, 0]), np.abs(a[:, None, 1] - b[None, :, 1]))
    cost[:n, :m] = pair**order
    cost[:n, m:] = (((a[:, 1] - a[:, 0]) / 2.0) ** order)[:, None]  # a's point to a diagonal copy
    cost[n:, :m] = (((b[:, 1] - b[:, 0]) / 2.0) ** order)[None, :]  # a diagonal copy to b's point
    ones = np.ones(n + m)
    return float(ot.emd2(ones, ones, cost, numItermax=10_000_000) ** (1.0 / order))


def _close(ours: float, reference: float) -> bool:
    return abs(ours - reference) <= TOL * max(1.0, abs(reference))


@settings(max_examples=150, deadline=None)
@given(a=diagrams(), b=diagrams(), order=st.sampled_from([1.0, 2.0, 1.5]))
def test_wasserstein_equals_pot_and_gudhi(a: np.ndarray, b: np.ndarray, order: float) -> None:
    ours = wasserstein_distance(a, b, order)
    assert _close(ours, _pot_wasserstein(a, b, order))
    assert _close(ours, gudhi_wasserstein(a, b, order=order, internal_p=np.inf))
    assert _close(wasserstein_distance(b, a, order), ours)


@settings(max_examples=60, deadline=None)
@given(a=diagrams(), b=diagrams())
def test_wasserstein_within_heras_guaranteed_error(a: np.ndarray, b: np.ndarray) -> None:
    # Hera's auction guarantees a value within a factor (1 + delta) of the optimum
    delta = 1e-6
    reference = hera_wasserstein(a, b, order=1.0, internal_p=np.inf, delta=delta)
    ours = wasserstein_distance(a, b, 1.0)
    assert ours <= reference * (1 + 1e-12) + 1e-12
    assert reference <= ours * (1 + delta) + 1e-12


@settings(max_examples=150, deadline=None)
@given(a=diagrams(), b=diagrams())
def test_bottleneck_equals_hera_and_persim(a: np.ndarray, b: np.ndarray) -> None:
    ours = bottleneck_distance(a, b)
    assert _close(ours, hera_bottleneck(a, b, delta=0))
    if len(a) and len(b):  # persim needs two non-empty diagrams
        assert _close(ours, float(persim_bottleneck(a, b)))
    assert _close(bottleneck_distance(b, a), ours)


@pytest.fixture(scope="module")
def consecutive(small_prices: pd.DataFrame) -> list[tuple[tuple[np.ndarray, ...], tuple[np.ndarray, ...]]]:
    """Diagrams of pairs of consecutive windows (window k and k + 1, every sixth k)."""
    result = monitor(small_prices, Config(window=30, maxdim=1, compute={"executor": "serial"}))
    windows = result.windows
    return [(windows[k].diagrams, windows[k + 1].diagrams) for k in range(0, len(windows) - 1, 6)]


def test_distances_between_real_consecutive_windows_equal_the_references(
    consecutive: list[tuple[tuple[np.ndarray, ...], tuple[np.ndarray, ...]]],
) -> None:
    checked = 0
    for previous, current in consecutive:
        for a, b in zip(previous, current):
            for order in (1.0, 2.0):
                assert _close(wasserstein_distance(a, b, order), _pot_wasserstein(a, b, order))
            assert _close(bottleneck_distance(a, b), hera_bottleneck(a, b, delta=0))
            checked += len(a) > 0 and len(b) > 0
    assert checked > 20
