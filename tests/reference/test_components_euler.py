"""Betti numbers read off our diagrams at a scale r, against counts made another way.

* H0: the number of H0 bars alive at r (birth <= r < death), plus the infinite bar our diagrams
  drop, equals the number of connected components of the threshold graph {d_ij <= r}
  (definition of H0 of the Rips complex; reference: scipy.sparse.csgraph.connected_components).
* Euler-Poincare formula: the Euler characteristic from simplex counts,
  chi = #vertices - #edges + #triangles - #tetrahedra + ..., equals sum_k (-1)^k b_k
  (any textbook, e.g. Hatcher, Algebraic Topology, Theorem 2.44). The simplices of the Rips
  complex at r are counted by gudhi's SimplexTree (all dimensions, so the count is complete).
  b0, b1, b2 come from our diagrams computed to maxdim 2; any b_k with k >= 3 from ripser run
  directly to dimension n - 2. A flag complex with H_k != 0 needs at least 2k + 2 vertices (cited
  from memory), so up to 7 vertices b0 - b1 + b2 is the whole sum; with 8 or 9 it almost always is.

Scales r are taken halfway between consecutive distinct distances (away from the critical
values, so float32 rounding cannot move a bar across r).
"""

from __future__ import annotations

import gudhi
import numpy as np
import pytest
from ripser import ripser
from scipy.sparse.csgraph import connected_components
from scipy.spatial.distance import pdist, squareform

from riskshape.compute.persistence import compute_diagrams


def _alive(dgm: np.ndarray, r: float) -> int:
    return int(np.sum((dgm[:, 0] <= r) & (r < dgm[:, 1])))


def _safe_scales(distance: np.ndarray, count: int, rng: np.random.Generator) -> np.ndarray:
    """Midpoints between consecutive distinct off-diagonal distances (plus one below, one above)."""
    values = np.unique(squareform(distance, checks=False))
    mids = (values[:-1] + values[1:]) / 2.0
    mids = mids[np.diff(values) > 1e-4 * values[1:]]
    chosen = rng.choice(mids, size=min(count, len(mids)), replace=False)
    return np.concatenate([[values[0] / 2.0], chosen, [values[-1] * 1.5]])


def _random_matrix(rng: np.random.Generator, n: int, euclidean: bool) -> np.ndarray:
    if euclidean:
        return squareform(pdist(rng.standard_normal((n, 3))))
    upper = np.triu(rng.uniform(0.1, 1.0, (n, n)), 1)
    return upper + upper.T


@pytest.mark.parametrize("maxdim", [0, 1])
def test_h0_bars_alive_equal_threshold_graph_components(rng: np.random.Generator, maxdim: int) -> None:
    for n in (3, 6, 12, 25):
        distance = _random_matrix(rng, n, euclidean=n % 2 == 0)
        h0 = compute_diagrams(distance, maxdim=maxdim, backend="ripser")[0]
        for r in _safe_scales(distance, 15, rng):
            n_components, _ = connected_components(distance <= r, directed=False)
            assert _alive(h0, r) + 1 == n_components, (n, r)


def _simplex_counts(distance: np.ndarray, r: float) -> np.ndarray:
    n = len(distance)
    tree = gudhi.RipsComplex(distance_matrix=distance, max_edge_length=r).create_simplex_tree(max_dimension=n - 1)
    counts = np.zeros(n, dtype=int)
    for simplex, _ in tree.get_simplices():
        counts[len(simplex) - 1] += 1
    return counts


@pytest.mark.parametrize("n", [4, 5, 6, 7, 8, 9])
def test_euler_characteristic_from_simplex_counts_equals_alternating_betti_sum(
    rng: np.random.Generator, n: int
) -> None:
    signs = np.array([(-1) ** k for k in range(n)])
    seen_b1 = seen_b2 = False
    for trial in range(6):
        distance = _random_matrix(rng, n, euclidean=trial % 2 == 0)
        diagrams = compute_diagrams(distance, maxdim=2, backend="ripser")
        higher = ripser(distance, maxdim=max(n - 2, 2), distance_matrix=True)["dgms"][3:]
        for r in _safe_scales(distance, 10, rng):
            chi = int(signs @ _simplex_counts(distance, r))
            betti = [_alive(diagrams[0], r) + 1, _alive(diagrams[1], r), _alive(diagrams[2], r)]
            beyond = sum((-1) ** (k + 3) * _alive(np.asarray(dgm), r) for k, dgm in enumerate(higher))
            if n <= 7:
                assert beyond == 0
            assert chi == betti[0] - betti[1] + betti[2] + beyond, (n, r, betti, beyond)
            seen_b1 |= betti[1] > 0
            seen_b2 |= betti[2] > 0
    if n >= 5:
        assert seen_b1  # the check must have met some loops


def test_octahedron_euler_characteristic_is_two() -> None:
    """The octahedron (vertices +-e_i) at r in (sqrt 2, 2) is a 2-sphere: 6 - 12 + 8 = 2 = 1 - 0 + 1."""
    distance = squareform(pdist(np.vstack([np.eye(3), -np.eye(3)])))
    r = 1.7
    counts = _simplex_counts(distance, r)
    assert counts[:4].tolist() == [6, 12, 8, 0]
    diagrams = compute_diagrams(distance, maxdim=2, backend="ripser")
    assert [_alive(diagrams[0], r) + 1, _alive(diagrams[1], r), _alive(diagrams[2], r)] == [1, 0, 1]
