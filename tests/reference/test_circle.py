"""Vietoris-Rips persistence of n points evenly spaced on a circle of radius r.

Source: Adamaszek and Adams, "The Vietoris-Rips complexes of a circle", Pacific J. Math. 290
(2017), and Adamaszek, Adams, Frick, Peterson, Previte-Johnson, "Nerve complexes of circular
arcs", Discrete Comput. Geom. 56 (2016) for the finite case (results cited from memory):
with edges between points at most k steps apart (0 < k < n/2), the complex is homotopy
equivalent to S^1 while k/n < 1/3, to a wedge of n - 2k - 1 two-spheres when k/n = 1/3 exactly,
and to S^3 just above 1/3. Hence one H1 bar, born when neighbours connect (the chord
2 r sin(pi / n)) and dying when k first reaches n/3, at the chord 2 r sin(pi ceil(n/3) / n);
for n divisible by 3 that is the chord of 120 degrees, exactly sqrt(3) r, and n/3 - 1 H2 bars are
born there.

ripser computes in float32, so values are compared with rtol 1e-6.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.spatial.distance import pdist, squareform

from riskshape.compute.persistence import compute_diagrams


def _circle_distance(n: int, radius: float) -> np.ndarray:
    angles = 2.0 * np.pi * np.arange(n) / n
    points = radius * np.column_stack([np.cos(angles), np.sin(angles)])
    return squareform(pdist(points))


def _chord(radius: float, steps: int, n: int) -> float:
    return 2.0 * radius * math.sin(math.pi * steps / n)


@pytest.mark.parametrize("n", [6, 9, 12, 15, 24])
@pytest.mark.parametrize("radius", [1.0, 0.37])
def test_n_divisible_by_three_dies_exactly_at_sqrt3_r(n: int, radius: float) -> None:
    h1 = compute_diagrams(_circle_distance(n, radius), maxdim=1, backend="ripser")[1]
    assert h1.shape == (1, 2)  # one loop, and nothing else in H1
    birth, death = h1[0]
    assert birth == pytest.approx(_chord(radius, 1, n), rel=1e-6)
    assert death == pytest.approx(math.sqrt(3.0) * radius, rel=1e-6)


@pytest.mark.parametrize("n", [7, 8, 10, 11, 13, 20])
def test_other_n_die_at_the_first_chord_reaching_a_third(n: int) -> None:
    radius = 1.0
    h1 = compute_diagrams(_circle_distance(n, radius), maxdim=1, backend="ripser")[1]
    assert h1.shape == (1, 2)
    birth, death = h1[0]
    assert birth == pytest.approx(_chord(radius, 1, n), rel=1e-6)
    assert death == pytest.approx(_chord(radius, math.ceil(n / 3), n), rel=1e-6)
    # "near sqrt(3) r": the death chord spans between 120 and 120 + 360/n degrees
    assert math.sqrt(3.0) * radius < death <= _chord(radius, n / 3 + 1, n) + 1e-6


@pytest.mark.parametrize("n", [6, 9, 12])
def test_wedge_of_two_spheres_at_the_third(n: int) -> None:
    """At k = n/3 the complex is a wedge of n - 2k - 1 = n/3 - 1 two-spheres (cited above)."""
    h2 = compute_diagrams(_circle_distance(n, 1.0), maxdim=2, backend="ripser")[2]
    born_at_third = np.isclose(h2[:, 0], math.sqrt(3.0), rtol=1e-6)
    assert int(born_at_third.sum()) == n // 3 - 1
