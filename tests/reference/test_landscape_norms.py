"""Persistence landscape norms (Bubenik 2015, JMLR 16:77, Definition 3 and Section 2.4).

lambda_k(t) is the k-th largest value of the tents f_(b,d)(t) = max(0, min(t - b, d - t));
the L^p norm of the landscape is (sum_k integral |lambda_k|^p dt)^(1/p), over all layers.

Checks:

* closed form for one bar (a tent of half-width h = (d - b) / 2): L1 = h^2, L2 = sqrt(2 h^3 / 3)
  (integrals worked by hand: area of a triangle h * h; integral of t^2 over two legs 2 h^3 / 3);
* hand-built diagrams with nested and overlapping bars, layer by layer (worked by hand below);
* an independent numerical integration of the layers built from the definition on a fine grid
  (scipy.integrate.trapezoid);
* persim's exact landscapes (persim.landscapes.PersLandscapeExact(...).p_norm(p)).

gudhi's ``representations.Landscape`` samples tents sqrt(2) times taller (it measures along the
diagonal), so it is not used as a reference here; that difference is stated in our docs.
"""

from __future__ import annotations

import numpy as np
import pytest
from persim.landscapes import PersLandscapeExact
from scipy.integrate import trapezoid

from riskshape.compute.summaries import landscape_norm


def _layers_on_grid(dgm: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Landscape layers lambda_1 >= lambda_2 >= ... on ``grid``, straight from the definition."""
    tents = np.maximum(0.0, np.minimum(grid[None, :] - dgm[:, :1], dgm[:, 1:] - grid[None, :]))
    return -np.sort(-tents, axis=0)  # row k holds the (k+1)-th largest tent value at each t


def _numerical_norm(dgm: np.ndarray, p: float, n_grid: int = 200_001) -> float:
    if len(dgm) == 0:
        return 0.0
    grid = np.linspace(dgm[:, 0].min(), dgm[:, 1].max(), n_grid)
    layers = _layers_on_grid(dgm, grid)
    return float(sum(trapezoid(layer**p, grid) for layer in layers) ** (1.0 / p))


@pytest.mark.parametrize("bar", [(0.0, 2.0), (0.3, 0.35), (1.0, 4.5), (0.0, 1e-3)])
def test_single_bar_closed_form(bar: tuple[float, float]) -> None:
    dgm = np.array([bar])
    h = (bar[1] - bar[0]) / 2.0
    assert landscape_norm(dgm, 1.0) == pytest.approx(h**2, rel=1e-12)
    assert landscape_norm(dgm, 2.0) == pytest.approx(np.sqrt(2.0 * h**3 / 3.0), rel=1e-12)
    assert landscape_norm(dgm, np.inf) == pytest.approx(h, rel=1e-12)  # sup of a tent is its height


def test_empty_diagram_has_zero_norms() -> None:
    empty = np.empty((0, 2))
    assert landscape_norm(empty, 1.0) == 0.0
    assert landscape_norm(empty, 2.0) == 0.0


def test_nested_bars_worked_by_hand() -> None:
    """(0, 4) and (1, 3): the small tent lies under the big one, so lambda_1 is the big tent
    (h = 2, area 4) and lambda_2 the small one (h = 1, area 1). L1 = 5; L2^2 = 2*8/3 + 2*1/3 = 6.
    """
    dgm = np.array([[0.0, 4.0], [1.0, 3.0]])
    assert landscape_norm(dgm, 1.0) == pytest.approx(5.0)
    assert landscape_norm(dgm, 2.0) == pytest.approx(np.sqrt(6.0))
    grid = np.linspace(0.0, 4.0, 40_001)
    layers = _layers_on_grid(dgm, grid)
    assert trapezoid(layers[0], grid) == pytest.approx(4.0, rel=1e-6)
    assert trapezoid(layers[1], grid) == pytest.approx(1.0, rel=1e-6)


def test_overlapping_bars_worked_by_hand() -> None:
    """(0, 4) and (2, 6): the tents cross at t = 3 (height 1). lambda_2 is the small triangle on
    [2, 4] under the crossing, area 1; lambda_1 is the rest, area 8 - 1 = 7; L1 = 8.
    lambda_2 = 1 - |t - 3| on [2, 4]: integral of its square is 2/3; lambda_1^2 integrates to
    2 * (2 * 8 / 3) - 2/3 = 10; L2 = sqrt(10 + 2/3) = sqrt(32 / 3).
    """
    dgm = np.array([[0.0, 4.0], [2.0, 6.0]])
    grid = np.linspace(0.0, 6.0, 60_001)
    layers = _layers_on_grid(dgm, grid)
    assert trapezoid(layers[0], grid) == pytest.approx(7.0, rel=1e-6)
    assert trapezoid(layers[1], grid) == pytest.approx(1.0, rel=1e-6)
    assert trapezoid(layers[1] ** 2, grid) == pytest.approx(2.0 / 3.0, rel=1e-6)
    assert landscape_norm(dgm, 1.0) == pytest.approx(8.0)
    assert landscape_norm(dgm, 2.0) == pytest.approx(np.sqrt(32.0 / 3.0))


def test_three_layers_worked_by_hand() -> None:
    """Three copies of (0, 2) stack into three equal layers: L1 = 3 * 1, L2 = sqrt(3 * 2/3)."""
    dgm = np.array([[0.0, 2.0]] * 3)
    assert landscape_norm(dgm, 1.0) == pytest.approx(3.0)
    assert landscape_norm(dgm, 2.0) == pytest.approx(np.sqrt(2.0))


@pytest.mark.parametrize("p", [1.0, 2.0, 3.0])
def test_matches_numerical_integration_of_layers(rng: np.random.Generator, p: float) -> None:
    for n in (1, 4, 9):
        birth = rng.uniform(0.0, 1.0, n)
        dgm = np.column_stack([birth, birth + rng.uniform(0.05, 0.8, n)])
        assert landscape_norm(dgm, p) == pytest.approx(_numerical_norm(dgm, p), rel=1e-5)


@pytest.mark.parametrize("p", [1, 2])
def test_matches_persim_exact_landscapes(rng: np.random.Generator, p: int) -> None:
    diagrams = [
        np.array([[0.0, 2.0]]),
        np.array([[0.0, 4.0], [1.0, 3.0]]),
        np.array([[0.0, 4.0], [2.0, 6.0]]),
    ]
    for n in (3, 7):
        birth = rng.uniform(0.0, 1.0, n)
        diagrams.append(np.column_stack([birth, birth + rng.uniform(0.05, 0.8, n)]))
    diagrams.append(np.column_stack([np.zeros(6), rng.uniform(0.1, 1.5, 6)]))  # an H0-like diagram
    for dgm in diagrams:
        reference = PersLandscapeExact(dgms=[dgm], hom_deg=0).p_norm(p=p)
        assert landscape_norm(dgm, float(p)) == pytest.approx(reference, rel=1e-9)
