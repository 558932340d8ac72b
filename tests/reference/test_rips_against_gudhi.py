"""Vietoris-Rips diagrams against an independent implementation, and engine against engine.

Reference: gudhi's ``RipsComplex`` + ``SimplexTree.compute_persistence`` (coefficients in Z/2,
like ripser; ``min_persistence=0`` keeps only bars of positive length, like our convention).
Our diagrams hold finite bars only (the infinite H0 bar is dropped) and are float32 rounded
(ripser computes in float32), so the comparison is of multisets of finite, positive-length bars
with rtol 1e-6 (a float32 ulp is ~6e-8 relative).

Second check: ``backend="ripser"`` (ripser.py) and ``backend="giotto"`` (giotto-ph's
``ripser_parallel``) give the same bars.
"""

from __future__ import annotations

import gudhi
import numpy as np
import pytest
from scipy.spatial.distance import pdist, squareform

from riskshape.compute.persistence import compute_diagrams


def _gudhi_diagrams(distance: np.ndarray, maxdim: int) -> list[np.ndarray]:
    """Finite, positive-length bars per dimension 0..maxdim from gudhi's Rips complex."""
    tree = gudhi.RipsComplex(distance_matrix=distance).create_simplex_tree(max_dimension=maxdim + 1)
    tree.compute_persistence(homology_coeff_field=2, min_persistence=0.0)
    out = []
    for dim in range(maxdim + 1):
        bars = np.asarray(tree.persistence_intervals_in_dimension(dim), dtype=float).reshape(-1, 2)
        bars = bars[np.isfinite(bars[:, 1]) & (bars[:, 1] > bars[:, 0])]
        out.append(bars)
    return out


def _as_multiset(bars: np.ndarray) -> np.ndarray:
    """Bars sorted by (death, birth): equal multisets give equal arrays."""
    bars = np.asarray(bars, dtype=float).reshape(-1, 2)
    return bars[np.lexsort((bars[:, 0], bars[:, 1]))]


def _random_distance(rng: np.random.Generator, n: int, kind: str) -> np.ndarray:
    if kind == "euclidean":
        return squareform(pdist(rng.standard_normal((n, 3))))
    if kind == "correlation":
        # a correlation distance sqrt(2 (1 - rho)) of random returns (Mantegna 1999)
        rho = np.corrcoef(rng.standard_normal((25, n)), rowvar=False)
        return np.sqrt(np.clip(2.0 * (1.0 - rho), 0.0, 4.0)) * (1 - np.eye(n))
    upper = np.triu(rng.uniform(0.1, 1.0, size=(n, n)), 1)
    return upper + upper.T


@pytest.mark.parametrize("kind", ["euclidean", "correlation", "dissimilarity"])
def test_h0_h1_agree_with_gudhi_rips(rng: np.random.Generator, kind: str) -> None:
    n_checked_h1 = 0
    for n in (4, 8, 12, 16):
        distance = _random_distance(rng, n, kind)
        ours = compute_diagrams(distance, maxdim=1, backend="ripser")
        reference = _gudhi_diagrams(distance, maxdim=1)
        for dim in (0, 1):
            assert ours[dim].shape == reference[dim].shape, (n, dim)
            np.testing.assert_allclose(_as_multiset(ours[dim]), _as_multiset(reference[dim]), rtol=1e-6, atol=0)
        n_checked_h1 += len(reference[1])
    assert n_checked_h1 > 0  # the comparison must have seen some H1 bars


def test_h2_agrees_with_gudhi_on_small_matrices(rng: np.random.Generator) -> None:
    for _ in range(3):
        distance = _random_distance(rng, 10, "dissimilarity")
        ours = compute_diagrams(distance, maxdim=2, backend="ripser")
        reference = _gudhi_diagrams(distance, maxdim=2)
        for dim in (0, 1, 2):
            np.testing.assert_allclose(_as_multiset(ours[dim]), _as_multiset(reference[dim]), rtol=1e-6, atol=0)


def test_octahedron_has_one_h2_bar_like_gudhi() -> None:
    """The six vertices +-e_i of R^3: a 2-sphere (octahedron) from sqrt(2) to 2 (worked by hand:
    every edge but the three antipodal diagonals has length sqrt(2), the diagonals have length 2).
    """
    points = np.vstack([np.eye(3), -np.eye(3)])
    distance = squareform(pdist(points))
    ours = compute_diagrams(distance, maxdim=2, backend="ripser")
    np.testing.assert_allclose(ours[2], [[np.sqrt(2.0), 2.0]], rtol=1e-6)
    np.testing.assert_allclose(ours[2], _gudhi_diagrams(distance, maxdim=2)[2], rtol=1e-6)
    assert len(ours[1]) == 0


@pytest.mark.parametrize("maxdim", [1, 2])
def test_ripser_and_giotto_engines_give_the_same_bars(rng: np.random.Generator, maxdim: int) -> None:
    pytest.importorskip("gph", reason="giotto-ph (the 'fast' extra) is not installed")
    for kind in ("euclidean", "correlation", "dissimilarity"):
        distance = _random_distance(rng, 14, kind)
        a = compute_diagrams(distance, maxdim=maxdim, backend="ripser")
        b = compute_diagrams(distance, maxdim=maxdim, backend="giotto")
        assert len(a) == len(b) == maxdim + 1
        for dim in range(maxdim + 1):
            assert a[dim].shape == b[dim].shape, (kind, dim)
            np.testing.assert_allclose(_as_multiset(a[dim]), _as_multiset(b[dim]), rtol=1e-6, atol=0)
