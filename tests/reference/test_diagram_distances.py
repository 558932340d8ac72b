"""Wasserstein and bottleneck distances between diagrams, against gudhi (and persim as a contrast).

Conventions of each library (read from their documentation and source, gudhi 3.x, persim 0.4):

* ours (riskshape.compute.summaries): Wasserstein of order p with the L-infinity ground metric, a point's
  distance to the diagonal being (death - birth) / 2; bottleneck with the L-infinity ground metric;
* gudhi.wasserstein.wasserstein_distance(X, Y, order=p, internal_p=inf): order ``order``, ground
  metric L^internal_p, so ``internal_p=inf`` is the L-infinity metric of the stability theorem
  (Cohen-Steiner, Edelsbrunner, Harer, Mileyko 2010); solved with POT's exact optimal transport;
* gudhi.bottleneck_distance(X, Y): L-infinity ground metric, exact up to the smallest positive
  double by default -- but gudhi 3.13 returns too large a value on some inputs (fixed upstream after
  3.13, gudhi-devel pull request 1367), so bottleneck values are checked against persim instead;
* persim.bottleneck(X, Y): L-infinity ground metric, exact (bipartite matching over the candidate
  values), an implementation independent of ours;
* persim.wasserstein(X, Y): order 1 with the Euclidean (L2) ground metric, so a point's distance to
  the diagonal is (death - birth) / sqrt(2). It is *not* our convention; the contrast test shows it.
"""

from __future__ import annotations

import gudhi
import numpy as np
import pytest
from gudhi.wasserstein import wasserstein_distance as gudhi_wasserstein
from persim import bottleneck as persim_bottleneck
from persim import wasserstein as persim_wasserstein

from riskshape.compute.summaries import bottleneck_distance, wasserstein_distance


def _random_diagram(rng: np.random.Generator, n: int, h0: bool = False) -> np.ndarray:
    birth = np.zeros(n) if h0 else rng.uniform(0.0, 1.5, n)
    return np.column_stack([birth, birth + rng.exponential(0.3, n) + 1e-3])


def _pairs(rng: np.random.Generator) -> list[tuple[np.ndarray, np.ndarray]]:
    sizes = [(0, 0), (0, 1), (3, 0), (1, 1), (2, 5), (6, 6), (9, 4), (12, 15)]
    pairs = [(_random_diagram(rng, n), _random_diagram(rng, m)) for n, m in sizes]
    pairs += [(_random_diagram(rng, n, h0=True), _random_diagram(rng, m, h0=True)) for n, m in [(5, 5), (7, 10)]]
    # larger pairs too (the engine may switch solver with size), including equal-size H0 pairs
    pairs += [
        (_random_diagram(rng, 80), _random_diagram(rng, 70)),
        (_random_diagram(rng, 90, h0=True), _random_diagram(rng, 90, h0=True)),
        (_random_diagram(rng, 8, h0=True), _random_diagram(rng, 8, h0=True)),
    ]
    near = _random_diagram(rng, 40, h0=True)  # consecutive windows: close H0 diagrams of equal size
    pairs.append((near, near + np.column_stack([np.zeros(40), rng.normal(0.0, 0.01, 40)])))
    same = _random_diagram(rng, 6)
    pairs.append((same, same.copy()))
    return pairs


@pytest.mark.parametrize("order", [1.0, 2.0, 1.5])
def test_wasserstein_matches_gudhi_linf_ground_metric(rng: np.random.Generator, order: float) -> None:
    for a, b in _pairs(rng):
        expected = gudhi_wasserstein(a, b, order=order, internal_p=np.inf)
        assert wasserstein_distance(a, b, order) == pytest.approx(expected, rel=1e-9, abs=1e-12)
        assert wasserstein_distance(b, a, order) == pytest.approx(expected, rel=1e-9, abs=1e-12)


def test_bottleneck_matches_persim(rng: np.random.Generator) -> None:
    for a, b in _pairs(rng):
        if len(a) == 0 or len(b) == 0:
            continue  # persim needs points on both sides; the empty cases are checked by hand below
        expected = persim_bottleneck(a, b)
        assert bottleneck_distance(a, b) == pytest.approx(expected, rel=1e-9, abs=1e-12)
        assert bottleneck_distance(b, a) == pytest.approx(expected, rel=1e-9, abs=1e-12)


def test_empty_diagrams() -> None:
    empty = np.empty((0, 2))
    bar = np.array([[0.0, 2.0], [1.0, 1.5]])  # half-lifetimes 1.0 and 0.25
    assert wasserstein_distance(empty, empty, 1.0) == 0.0
    assert bottleneck_distance(empty, empty) == 0.0
    for order in (1.0, 2.0):
        expected = gudhi_wasserstein(bar, empty, order=order, internal_p=np.inf)
        assert wasserstein_distance(bar, empty, order) == pytest.approx(expected, rel=1e-12)
    # by hand: every point goes to the diagonal, at L-infinity distance half its lifetime
    assert wasserstein_distance(bar, empty, 1.0) == pytest.approx(1.25)
    assert wasserstein_distance(empty, bar, 2.0) == pytest.approx(np.sqrt(1.0 + 0.0625))
    assert bottleneck_distance(bar, empty) == pytest.approx(gudhi.bottleneck_distance(bar, empty))
    assert bottleneck_distance(empty, bar) == pytest.approx(1.0)


def test_bottleneck_is_the_limit_of_wasserstein_and_bounds_it(rng: np.random.Generator) -> None:
    """W_p decreases to the bottleneck distance as p grows (a standard fact, from memory)."""
    a, b = _random_diagram(rng, 7), _random_diagram(rng, 9)
    bottle = bottleneck_distance(a, b)
    w1, w2, w50 = (wasserstein_distance(a, b, p) for p in (1.0, 2.0, 50.0))
    assert w1 >= w2 >= w50 >= bottle - 1e-12
    assert w50 == pytest.approx(bottle, rel=0.1)


def test_persim_wasserstein_uses_another_ground_metric() -> None:
    """Documents the convention: persim's L2 ground metric differs from ours on a single bar.

    One bar (0, 2) against the empty diagram: L-infinity distance to the diagonal is 1 (ours and
    gudhi with internal_p=inf); the Euclidean distance to the diagonal is 2 / sqrt(2) (persim).
    """
    bar, empty = np.array([[0.0, 2.0]]), np.empty((0, 2))
    ours = wasserstein_distance(bar, empty, 1.0)
    assert ours == pytest.approx(gudhi_wasserstein(bar, empty, order=1.0, internal_p=np.inf))
    assert ours == pytest.approx(1.0)
    assert persim_wasserstein(bar, empty) == pytest.approx(np.sqrt(2.0))
    assert persim_wasserstein(bar, empty) != pytest.approx(ours)
    # and it equals gudhi with the L2 ground metric, which confirms what persim measures
    assert persim_wasserstein(bar, empty) == pytest.approx(gudhi_wasserstein(bar, empty, order=1.0, internal_p=2.0))
