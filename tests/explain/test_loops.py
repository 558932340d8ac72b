"""Loop explanation (H1): representative cycles on a circle and on the scenario's ring of assets."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from ripser import ripser
from scipy.spatial.distance import pdist, squareform

from riskshape import Config, monitor
from riskshape.demo.scenario import generate_scenario
from riskshape.explain import explain_alert
from riskshape.explain.loops import canonical_cycle, cycle_from_cocycle, representative_cycles, track_loop


def circle_points(rng: np.random.Generator, n: int, jitter: float) -> tuple[np.ndarray, np.ndarray]:
    """``n`` points on a circle of random radius, angles evenly spaced then jittered by up to
    ``jitter`` of the spacing, listed in a random order. Returns the points and their angles.
    """
    spacing = 2 * np.pi / n
    angles = (np.arange(n) * spacing + rng.uniform(-jitter, jitter, n) * spacing + rng.uniform(0, 2 * np.pi)) % (
        2 * np.pi
    )
    order = rng.permutation(n)
    angles = angles[order]
    radius = rng.uniform(0.5, 20.0)
    return radius * np.column_stack([np.cos(angles), np.sin(angles)]), angles


def same_cycle(a: tuple[int, ...] | list, b: tuple[int, ...] | list) -> bool:
    """Equal up to rotation and direction."""
    a, b = list(a), list(b)
    if len(a) != len(b) or set(a) != set(b):
        return False
    k = b.index(a[0])
    rotated = b[k:] + b[:k]
    return a == rotated or a == [rotated[0]] + rotated[:0:-1]


@pytest.mark.parametrize("jitter", [0.0, 0.3])
def test_cycle_on_a_circle_visits_every_point_in_circular_order(rng: np.random.Generator, jitter: float) -> None:
    # With at most 30% jitter of the spacing and n >= 6 every angular gap is < 2*pi/3, so the Rips
    # complex of the sample has exactly one essential loop (Adamaszek & Adams 2017, "The Vietoris-Rips
    # complexes of a circle", Pacific J. Math. 290:1-40; threshold from memory). Its representative
    # cycle must be the polygon through all points in circular order.
    for _ in range(40):
        n = int(rng.integers(6, 40))
        points, angles = circle_points(rng, n, jitter)
        cycles = representative_cycles(squareform(pdist(points)), n_loops=1)
        assert len(cycles) == 1
        assert same_cycle(cycles[0].points, list(np.argsort(angles)))


def test_cycle_pairs_with_its_cocycle(rng: np.random.Generator) -> None:
    """The recovered cycle is closed in the Rips graph below death and meets the cocycle an odd number
    of times (Z/2 coefficients): it carries the class (de Silva, Morozov & Vejdemo-Johansson 2011).
    """
    for _ in range(20):
        points = np.vstack([circle_points(rng, 12, 0.3)[0], circle_points(rng, 9, 0.3)[0] + 30.0])
        points += 0.05 * rng.standard_normal(points.shape)
        distance = squareform(pdist(points))
        out = ripser(distance, maxdim=1, distance_matrix=True, do_cocycles=True)
        for (birth, death), cocycle in zip(out["dgms"][1], out["cocycles"][1]):
            cycle = cycle_from_cocycle(distance, float(birth), float(death), cocycle)
            assert cycle is not None
            edges = list(zip(cycle.points, cycle.points[1:] + cycle.points[:1]))
            lengths = np.array([distance[a, b] for a, b in edges], dtype=np.float32)
            assert np.all(lengths < np.float32(death))
            support = {(min(i, j), max(i, j)) for i, j, v in cocycle if v % 2}
            assert sum((min(a, b), max(a, b)) in support for a, b in edges) % 2 == 1


@pytest.mark.parametrize("seed", [3, 7, 8])
def test_cycle_follows_the_scenario_ring(seed: int) -> None:
    # Ground truth: in the scenario's rewired regime each ring asset shares a factor with each neighbour
    # in scenario.ring order (riskshape.demo.scenario). One window spanning the regime keeps sampling noise low.
    scenario = generate_scenario(seed=seed)
    start = scenario.regimes.set_index("name").loc["rewired", "start"]
    prices = scenario.prices.loc[start - pd.offsets.BDay(1) :]
    result = monitor(prices, Config(window=360, step=5, compute={"executor": "serial"}))
    end = result.window_ends[0]
    loops = explain_alert(result, end, "h1_landscape_l1", n_loops=1).loops
    assert loops is not None and len(loops.loops) == 1
    assert same_cycle(loops.loops[0].members, scenario.ring)
    # the loop's bar is one of the engine's H1 bars of that window
    bars = result.diagram(end, 1)
    assert np.any(np.all(np.isclose(bars, [loops.loops[0].birth, loops.loops[0].death], atol=1e-6), axis=1))


def test_loop_lifetime_counts_consecutive_windows() -> None:
    scenario = generate_scenario(seed=7)
    start = scenario.regimes.set_index("name").loc["rewired", "start"]
    prices = scenario.prices.loc[start - pd.offsets.BDay(1) :]
    result = monitor(prices, Config(window=300, step=10, compute={"executor": "serial"}))
    last = result.window_ends[-1]
    (loop,) = explain_alert(result, last, "h1_entropy", n_loops=1).loops.loops
    assert same_cycle(loop.members, scenario.ring)
    # every window of this run lies in the rewired regime: the ring lives in all of them
    assert loop.windows_alive == len(result.window_ends)
    assert loop.first_seen == result.window_ends[0].date()
    assert not loop.lookback_exhausted
    limited = explain_alert(result, last, "h1_entropy", n_loops=1, lookback=2).loops.loops[0]
    assert limited.windows_alive == 3 and limited.lookback_exhausted


def test_track_loop_stops_at_the_first_window_without_a_match() -> None:
    earlier = [[("a", "b", "c", "e")], [("p", "q", "r")], [("a", "b", "c", "d")]]
    assert track_loop(("a", "b", "c", "d"), earlier.__getitem__, 3, 0.5) == 1
    assert track_loop(("a", "b", "c", "d"), earlier.__getitem__, 3, 0.9) == 0


def test_canonical_cycle_is_the_same_for_every_rotation_and_direction() -> None:
    cycle = [4, 9, 1, 7, 3]
    forms = {canonical_cycle(cycle[k:] + cycle[:k]) for k in range(5)}
    forms |= {canonical_cycle((cycle[::-1])[k:] + (cycle[::-1])[:k]) for k in range(5)}
    assert forms == {(1, 7, 3, 4, 9)}
