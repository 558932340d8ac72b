"""The persistence fast paths equal the plain ones.

* the relabelled points (``vertex_order``) against ripser on the original numbering: same bars
  (a persistence diagram does not depend on how the points are numbered: standard fact, from
  memory), also on distances with many ties, where the numbering breaks them;
* giotto-ph's ``ripser_parallel`` (one thread) against ripser: same bars, bit for bit (giotto-ph
  runs ripser's algorithm on the same float32 values);
* H0 from scipy's single linkage against ripser at maxdim 0: the H0 deaths of a Rips filtration
  are the edge weights of a minimum spanning tree (a standard fact, from memory), which single
  linkage merges at; both round distances to float32 first, so the values agree exactly;
* closed-form landscape norms against persim's exact landscapes (``PersLandscapeExact.p_norm``).
"""

from __future__ import annotations

import numpy as np
import pytest
from persim.landscapes import PersLandscapeExact
from ripser import ripser

from riskshape.compute.distance import correlation_matrix, correlation_to_distance
from riskshape.compute.persistence import compute_diagrams, h0_from_single_linkage, vertex_order
from riskshape.compute.summaries import landscape_norm


def _distance(rng: np.random.Generator, days: int, assets: int) -> np.ndarray:
    common = rng.standard_normal(days)[:, None] * rng.uniform(0.2, 1.0, assets)
    groups = rng.integers(0, 4, assets)
    sector = rng.standard_normal((days, 4))[:, groups] * rng.uniform(0.2, 0.9, assets)
    return correlation_to_distance(correlation_matrix(common + sector + rng.standard_normal((days, assets))))


@pytest.mark.parametrize("assets", [8, 40, 120])
def test_giotto_equals_ripser_bit_for_bit(rng: np.random.Generator, assets: int) -> None:
    pytest.importorskip("gph")
    distance = _distance(rng, 60, assets)
    fast = compute_diagrams(distance, 1, backend="giotto")
    plain = compute_diagrams(distance, 1, backend="ripser")
    assert len(plain[1]) > 0
    for x, y in zip(fast, plain):
        np.testing.assert_array_equal(x, y)


def _plain_ripser(distance: np.ndarray) -> list[np.ndarray]:
    """Ripser on the original numbering, finite non-zero bars sorted as compute_diagrams sorts them."""
    out = []
    for raw in ripser(distance, maxdim=1, distance_matrix=True)["dgms"]:
        bars = raw.astype(np.float32).astype(float)
        bars = bars[np.isfinite(bars[:, 1]) & (bars[:, 1] > bars[:, 0])]
        out.append(bars[np.lexsort((bars[:, 0], bars[:, 1]))])
    return out


@pytest.mark.parametrize("engine", ["ripser", "giotto"])
@pytest.mark.parametrize(("assets", "ties"), [(12, False), (90, False), (90, True), (200, False)])
def test_relabelled_points_give_ripsers_bars(rng: np.random.Generator, engine: str, assets: int, ties: bool) -> None:
    if engine == "giotto":
        pytest.importorskip("gph")
    distance = _distance(rng, 60, assets)
    if ties:  # a coarse grid: many edges of equal length, so the numbering breaks ties
        distance = np.round(distance, 1)
    order = vertex_order(distance)
    assert sorted(order.tolist()) == list(range(assets))
    assert not np.array_equal(order, np.arange(assets))  # the relabelling does something here
    fast = compute_diagrams(distance, 1, backend=engine)
    plain = _plain_ripser(distance)
    assert len(plain[1]) > 0
    for x, y in zip(fast, plain):
        np.testing.assert_array_equal(x, y)


@pytest.mark.parametrize("assets", [5, 60, 300])
def test_single_linkage_h0_equals_ripser_maxdim0(rng: np.random.Generator, assets: int) -> None:
    distance = _distance(rng, 40, assets)
    fast = compute_diagrams(distance, 0)[0]
    np.testing.assert_array_equal(fast, h0_from_single_linkage(distance))
    raw = ripser(distance, maxdim=0, distance_matrix=True)["dgms"][0]
    plain = np.sort(raw[np.isfinite(raw[:, 1]), 1].astype(np.float32).astype(float))
    np.testing.assert_array_equal(fast[:, 1], plain[plain > 0])
    assert np.all(fast[:, 0] == 0.0)


def test_landscape_closed_form_equals_persim_exact_landscapes(rng: np.random.Generator) -> None:
    diagrams = [compute_diagrams(_distance(rng, 50, 30), 1, backend="ripser")[k] for k in (0, 1)]
    births = rng.uniform(0.0, 1.0, 9)
    diagrams.append(np.column_stack([births, births + rng.exponential(0.4, 9)]))
    for dgm in diagrams:
        assert len(dgm) > 0
        for p in (1, 2, 3):
            exact = PersLandscapeExact(dgms=[dgm], hom_deg=0).p_norm(p)
            assert landscape_norm(dgm, p) == pytest.approx(exact, rel=1e-9)
