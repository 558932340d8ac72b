"""Summaries of persistence diagrams and distances between diagrams.

Conventions (stated here, checked in tests/reference):

* diagrams hold finite bars (birth, death) only; lifetimes l_i = death - birth;
* total persistence = sum l_i; persistent entropy = -sum p_i log p_i with p_i = l_i / sum l
  (natural log; 0 for an empty diagram);
* persistence landscape (Bubenik 2015, JMLR 16:77): lambda_k(t) is the k-th largest of
  max(0, min(t - b, d - t)); its p-norm over all layers is
  ``(sum_i 2 h_i^(p+1) / (p+1))^(1/p)`` with h_i = l_i / 2, exact, since summing the p-th
  powers of all layers sums the p-th powers of every bar's tent. A single bar gives
  L1 = h^2 and L2 = sqrt(2 h^3 / 3). (gudhi's ``Landscape`` samples tents sqrt(2) times taller.)
* Wasserstein distance of order p with the L-infinity ground metric (the metric of the stability
  theorem, Cohen-Steiner et al. 2010): a point's distance to the diagonal is l / 2. persim's
  ``wasserstein`` uses the L2 ground metric instead, so its values differ from ours;
* bottleneck distance with the L-infinity ground metric.

How the distances are computed (all exact, differing by float64 rounding only): see
:mod:`riskshape.compute.matching`; ``tests/compute`` checks every fast path against the plain one.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Literal

import numpy as np

from riskshape.compute.matching import (
    assignment_wasserstein,
    pair_costs,
    persim_bottleneck,
    reduced_assignment_matching,
    reduced_assignment_wasserstein,
    sorted_bottleneck_is_optimal,
    sorted_matching_is_optimal,
    threshold_bottleneck,
)
from riskshape.types import Diagram, FloatArray

__all__ = [
    "DiagramSummary",
    "summarize_diagram",
    "total_persistence",
    "persistent_entropy",
    "landscape_norm",
    "wasserstein_distance",
    "bottleneck_distance",
    "diagram_pair_distances",
    "SUMMARY_NAMES",
    "DISTANCE_NAMES",
]


def _lifetimes(dgm: Diagram) -> FloatArray:
    return dgm[:, 1] - dgm[:, 0] if len(dgm) else np.empty(0)


def total_persistence(dgm: Diagram) -> float:
    """Sum of the bars' lifetimes.

    Examples
    --------
    >>> import numpy as np
    >>> total_persistence(np.array([[0.0, 1.0], [0.5, 2.0]]))
    2.5
    """
    return float(_lifetimes(dgm).sum())


def persistent_entropy(dgm: Diagram) -> float:
    """Shannon entropy (natural log) of the lifetimes normalised to sum to one; 0 if empty.

    Examples
    --------
    >>> import numpy as np
    >>> round(persistent_entropy(np.array([[0.0, 1.0], [0.0, 1.0]])), 6)  # log 2
    0.693147
    """
    return _entropy(_lifetimes(dgm))


def _entropy(life: FloatArray) -> float:
    total = life.sum()
    if total <= 0:
        return 0.0
    p = life[life > 0] / total
    return float(-(p * np.log(p)).sum())


def landscape_norm(dgm: Diagram, p: float = 1.0) -> float:
    """Exact L^p norm of the persistence landscape over all layers (Bubenik 2015).

    Parameters
    ----------
    dgm : numpy.ndarray
        (n, 2) finite bars.
    p : float
        Order, ``p >= 1`` or ``numpy.inf``.

    Returns
    -------
    float

    Examples
    --------
    >>> import numpy as np
    >>> landscape_norm(np.array([[0.0, 2.0]]), 1)  # tent of half-width 1: area 1
    1.0
    """
    return _landscape_norm(_lifetimes(dgm) / 2.0, p)


def _landscape_norm(half: FloatArray, p: float) -> float:
    if len(half) == 0:
        return 0.0
    if np.isinf(p):
        return float(half.max())
    return float((2.0 * np.sum(half ** (p + 1.0)) / (p + 1.0)) ** (1.0 / p))


def wasserstein_distance(
    a: Diagram,
    b: Diagram,
    order_p: float = 1.0,
    method: Literal["auto", "assignment"] = "auto",
) -> float:
    """Wasserstein distance of order ``order_p`` between two diagrams, L-infinity ground metric.

    Each point may be matched to a point of the other diagram (cost: L-infinity distance) or to
    the diagonal (cost: half its lifetime); the cheapest matching is found exactly.

    Parameters
    ----------
    a, b : numpy.ndarray
        (n, 2) and (m, 2) finite bars.
    order_p : float
        Order ``p >= 1``.
    method : {"auto", "assignment"}
        ``auto``: for H0 diagrams (all births 0) of equal size, the sorted matching where its
        check proves it optimal; otherwise the reduced assignment problem. ``assignment``:
        scipy's ``linear_sum_assignment`` on the square matrix (the plain path). See
        :mod:`riskshape.compute.matching`.

    Returns
    -------
    float

    Examples
    --------
    >>> import numpy as np
    >>> wasserstein_distance(np.array([[0.0, 2.0]]), np.empty((0, 2)))
    1.0
    """
    n, m = len(a), len(b)
    if n == 0 and m == 0:
        return 0.0
    if n == 0 or m == 0:
        to_diag = np.concatenate([_lifetimes(a), _lifetimes(b)]) / 2.0
        return float(np.sum(to_diag**order_p) ** (1.0 / order_p))
    if method == "auto":
        if n == m and _births_zero(a) and _births_zero(b):
            da, db = np.sort(a[:, 1]), np.sort(b[:, 1])
            if sorted_matching_is_optimal(da, db, order_p):
                return float(np.sum(np.abs(da - db) ** order_p) ** (1.0 / order_p))
        return reduced_assignment_wasserstein(a, b, order_p)
    return assignment_wasserstein(a, b, order_p)


def bottleneck_distance(a: Diagram, b: Diagram, method: Literal["auto", "persim"] = "auto") -> float:
    """Bottleneck distance between two diagrams, L-infinity ground metric (exact).

    Parameters
    ----------
    a, b : numpy.ndarray
        (n, 2) and (m, 2) finite bars.
    method : {"auto", "persim"}
        ``auto``: for H0 diagrams (all births 0) of equal size, the sorted matching where its
        check proves it optimal; otherwise the smallest threshold at which a bipartite matching
        exists. ``persim``: persim's exact ``bottleneck`` (the plain path). See
        :mod:`riskshape.compute.matching`.

    Returns
    -------
    float

    Examples
    --------
    >>> import numpy as np
    >>> bottleneck_distance(np.array([[0.0, 2.0]]), np.array([[0.0, 1.5]]))
    0.5
    """
    if len(a) == 0 and len(b) == 0:
        return 0.0
    if len(a) == 0 or len(b) == 0:
        return float(np.max(_lifetimes(a if len(a) else b)) / 2.0)
    if method == "auto":
        if len(a) == len(b) and _births_zero(a) and _births_zero(b):
            da, db = np.sort(a[:, 1]), np.sort(b[:, 1])
            if sorted_bottleneck_is_optimal(da, db):
                return float(np.max(np.abs(da - db)))
        return threshold_bottleneck(a, b)
    return persim_bottleneck(a, b)


def diagram_pair_distances(a: Diagram, b: Diagram, order_p: float = 1.0) -> tuple[float, float]:
    """Wasserstein (order ``order_p``) and bottleneck distances between two diagrams, pair costs shared.

    The same values as :func:`wasserstein_distance` and :func:`bottleneck_distance` with
    ``method="auto"`` (the same paths, in the same arithmetic); the (n, m) pair costs both need,
    where they need them, are computed once.

    Parameters
    ----------
    a, b : numpy.ndarray
        (n, 2) and (m, 2) finite bars.
    order_p : float
        Order of the Wasserstein distance, ``p >= 1``.

    Returns
    -------
    tuple of float
        ``(wasserstein, bottleneck)``.

    Examples
    --------
    >>> import numpy as np
    >>> diagram_pair_distances(np.array([[0.0, 2.0]]), np.array([[0.0, 1.5]]))
    (0.5, 0.5)
    """
    n, m = len(a), len(b)
    if n == 0 or m == 0:
        return wasserstein_distance(a, b, order_p), bottleneck_distance(a, b)
    cross = None
    wasserstein = bottleneck = upper = None
    if n == m and _births_zero(a) and _births_zero(b):
        da, db = np.sort(a[:, 1]), np.sort(b[:, 1])
        if sorted_matching_is_optimal(da, db, order_p):
            wasserstein = float(np.sum(np.abs(da - db) ** order_p) ** (1.0 / order_p))
        # the sorted matching is a matching: its largest cost bounds the bottleneck from above
        upper = float(np.max(np.abs(da - db)))
        if sorted_bottleneck_is_optimal(da, db):
            bottleneck = upper
    if wasserstein is None:
        cross = pair_costs(a, b)
        # so does the optimal Wasserstein matching's largest cost
        wasserstein, largest = reduced_assignment_matching(a, b, order_p, cross)
        upper = largest if upper is None else min(upper, largest)
    if bottleneck is None:
        bottleneck = threshold_bottleneck(a, b, pair_costs(a, b) if cross is None else cross, upper)
    return wasserstein, bottleneck


def _births_zero(dgm: Diagram) -> bool:
    return bool(np.all(dgm[:, 0] == 0.0))


@dataclass(frozen=True)
class DiagramSummary:
    """The per-diagram summaries reported for each homology dimension."""

    n_bars: int
    total_persistence: float
    entropy: float
    landscape_l1: float
    landscape_l2: float

    def as_tuple(self) -> tuple[float, ...]:
        """Values in :data:`SUMMARY_NAMES` order."""
        # not dataclasses.astuple: it deep-copies every field, a third of the features' cost
        return (self.n_bars, self.total_persistence, self.entropy, self.landscape_l1, self.landscape_l2)


SUMMARY_NAMES: tuple[str, ...] = tuple(f.name for f in fields(DiagramSummary))
DISTANCE_NAMES: tuple[str, ...] = ("wasserstein", "bottleneck")


def summarize_diagram(dgm: Diagram) -> DiagramSummary:
    """All per-diagram summaries of one diagram.

    Parameters
    ----------
    dgm : Diagram
        Finite bars, shape (n, 2): birth, death.

    Returns
    -------
    DiagramSummary
        Number of bars, total persistence, entropy and landscape norms.
    """
    life = _lifetimes(dgm)  # once for all summaries (same arithmetic as the functions above)
    half = life / 2.0
    return DiagramSummary(
        n_bars=int(len(dgm)),
        total_persistence=float(life.sum()),
        entropy=_entropy(life),
        landscape_l1=_landscape_norm(half, 1.0),
        landscape_l2=_landscape_norm(half, 2.0),
    )
