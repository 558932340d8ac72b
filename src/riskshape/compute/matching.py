"""Exact optimal matchings between persistence diagrams: solvers, fast paths and their checks.

The public distances are :func:`riskshape.compute.summaries.wasserstein_distance` and
:func:`riskshape.compute.summaries.bottleneck_distance`; this module holds how they are computed. Every
path gives the exact optimum; paths differ by float64 rounding only. Ground metric L-infinity; a
point's cost to the diagonal is half its lifetime.

* **Sorted matching of H0 diagrams.** A Rips filtration gives every H0 bar birth 0, so matching
  deaths d and e costs |d - e|^p, a convex function of d - e: with both death lists sorted the
  cost matrix is a Monge array. The sorted matching (i-th with i-th) is optimal among all
  partial matchings exactly when LP dual potentials exist that are tight on it
  (complementary slackness). Thanks to the Monge property the dual constraints between points
  reduce to neighbouring pairs, so existence is decided by interval propagation along the
  list (:func:`sorted_matching_is_optimal`): the per-pair check. For the bottleneck, the sorted
  matching minimises the largest difference among perfect matchings of reals (a classical
  exchange argument), and no point gains by going to the diagonal when the largest pair cost
  does not exceed every point's cost to the diagonal (:func:`sorted_bottleneck_is_optimal`).
* **Assignment problem, plain** (scipy's ``linear_sum_assignment``) on the (n + m) square cost
  matrix where every point has its own diagonal copy: the textbook formulation, kept as the
  reference the fast paths are checked against.
* **Assignment problem, reduced** (the fast path). Write each pair's cost minus both points'
  costs to the diagonal as its gain (a partial matching then costs a constant, every point to
  the diagonal, plus the gains of its pairs). A pair with gain >= 0 is never needed (both points
  can go to the diagonal instead), so a point whose pairs all have gain >= 0 goes to the diagonal
  and leaves the problem. The rest, the smaller side's n points as rows, is an assignment onto
  the other side's m points and k zero-gain "diagonal" columns shared by all rows. Its optimum
  is the optimal partial matching as soon as one shared column stays free: that column's dual
  is 0, so every row's dual is <= 0, and more zero columns would leave the duals feasible and the
  assignment optimal (LP complementary slackness); otherwise k doubles (up to n, every row its
  own column, the textbook case). k starts at n / 4 + 8, where about one point in ten goes to
  the diagonal between consecutive windows. Its cost is summed from the matching itself, with no
  cancellation. Against the previous form (n own diagonal slots, an n x (m + n) matrix), on H1
  diagrams of consecutive windows, old and new in one process: 1.17x faster at 100 assets,
  window 60 (0.285 against 0.332 ms), 1.1x at 300 and 500 assets, 0.8x to 0.9x on the small
  diagrams of 50 assets or window 250 (under 0.1 ms either way); against POT's network simplex
  (through gudhi) the previous form was 2x to 3x faster already.
* **Bottleneck by thresholds.** The bottleneck distance is the smallest candidate value t (a
  pair cost or a diagonal cost) at which a matching of cost at most t exists (the classical
  reduction to bipartite matching, Efrat, Itai and Katz 2001, from memory). A matching within
  the pairs of cost <= t must cover every point whose diagonal cost exceeds t, and by the
  Mendelsohn-Dulmage theorem one covering the forced points of each diagram separately
  suffices. Each diagram's condition is monotone in t, so the distance is the larger of the two
  diagrams' smallest thresholds, found one diagram after the other (the second starting at the
  first's). Each search starts at a lower bound (every point needs a partner or the diagonal:
  t >= max over points of min(nearest cost, diagonal cost)), which is the answer in most
  consecutive windows, and tests it with a maximum bipartite matching (Kuhn's augmenting paths
  in Python for up to 48 forced points, where building scipy's sparse graph would cost more
  than the search; scipy's ``maximum_bipartite_matching``, Hopcroft-Karp, above). Where the
  matching leaves a forced point out, the points it reaches by alternating paths form a set
  that violates Hall's condition; the condition keeps failing until t reaches the cheapest
  pair from that set to a point outside its neighbourhood or the smallest diagonal cost in it
  (below both, the set and its neighbourhood are unchanged), so the search jumps there and
  tests again. Every value tested
  is a candidate no larger than the answer, so the first that holds is the answer, exactly.
  Where the Wasserstein distance of the same pair was solved by the reduced assignment, the
  largest cost in its optimal matching is an upper bound (it is a matching); where it equals the
  lower bound that is the answer and no bipartite matching is tested (about one H1 pair in ten
  to three between consecutive windows at 50 to 100 assets).
  On the H1 diagrams of consecutive windows this tests 2.4 matchings a pair against 4.5 for
  the bisection over the sorted candidates it replaced (1.4x to 1.8x faster, see
  benchmarks/README.md). gudhi's ``bottleneck_distance`` is not used: it is known to return a
  too large value on some inputs (GUDHI/gudhi-devel pull request 1367, merged after gudhi 3.13;
  tests/compute holds one such input). persim's exact ``bottleneck`` is the plain path.
* **Shared pair costs.** The Wasserstein and bottleneck distances between the same two
  diagrams take the same (n, m) pair costs (:func:`pair_costs`), computed once per pair of
  diagrams by :func:`riskshape.compute.summaries.diagram_pair_distances`.
"""

from __future__ import annotations

import warnings
from typing import cast

import numpy as np
from scipy.optimize import linear_sum_assignment
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_bipartite_matching

from riskshape.types import BoolArray, Diagram, FloatArray, Positions

__all__ = [
    "sorted_matching_is_optimal",
    "sorted_bottleneck_is_optimal",
    "assignment_wasserstein",
    "reduced_assignment_wasserstein",
    "reduced_assignment_matching",
    "threshold_bottleneck",
    "persim_bottleneck",
    "pair_costs",
]


def _half_lifetimes(dgm: Diagram) -> FloatArray:
    return (dgm[:, 1] - dgm[:, 0]) / 2.0


def sorted_matching_is_optimal(da: Diagram, db: Diagram, order_p: float) -> bool:
    """Whether matching sorted deaths ``da[i] <-> db[i]`` is an optimal Wasserstein-p matching.

    Parameters
    ----------
    da, db : numpy.ndarray
        Deaths of two diagrams whose births are all 0, sorted ascending, of equal length >= 1.
    order_p : float
        Order of the Wasserstein distance.

    Returns
    -------
    bool
        True when potentials f_i (for ``da[i]``) and c_ii - f_i (for ``db[i]``) exist with
        f_i <= (da_i / 2)^p, c_ii - f_i <= (db_i / 2)^p and
        c_{i+1,i+1} - c_{i,i+1} <= f_{i+1} - f_i <= c_{i+1,i} - c_{i,i}, where
        c_ij = |da_i - db_j|^p; that is, when the sorted matching is optimal.

    Notes
    -----
    The recursions lo_{i+1} = max(L_{i+1}, lo_i + s_i), hi_{i+1} = min(U_{i+1}, hi_i + t_i) of the
    feasible interval of f unroll (max-plus algebra) into running extrema of cumulative sums.

    Examples
    --------
    Close deaths are best matched in order; a short bar far from its sorted partner is better
    sent to the diagonal (0.1 -> 0.9 costs 0.8, both to the diagonal 0.05 + 0.45 = 0.5):

    >>> import numpy as np
    >>> sorted_matching_is_optimal(np.array([0.5, 1.0]), np.array([0.55, 1.05]), 1.0)
    True
    >>> sorted_matching_is_optimal(np.array([0.1, 1.0]), np.array([0.9, 1.0]), 1.0)
    False
    """
    diag = np.abs(da - db) ** order_p
    upper = (da / 2.0) ** order_p
    lower = diag - (db / 2.0) ** order_p
    step_lo = diag[1:] - np.abs(da[:-1] - db[1:]) ** order_p
    step_hi = np.abs(da[1:] - db[:-1]) ** order_p - diag[:-1]
    cum_lo = np.concatenate([[0.0], np.cumsum(step_lo)])
    cum_hi = np.concatenate([[0.0], np.cumsum(step_hi)])
    lo = cum_lo + np.maximum.accumulate(lower - cum_lo)
    hi = cum_hi + np.minimum.accumulate(upper - cum_hi)
    scale = max(1.0, float(np.abs(cum_lo).max()), float(np.abs(cum_hi).max()), float(upper.max()))
    return bool(np.all(lo <= hi + 1e-12 * scale))


def sorted_bottleneck_is_optimal(da: Diagram, db: Diagram) -> bool:
    """Whether the sorted matching of two equal-length sorted death lists (births 0) is bottleneck-optimal.

    True when its largest pair cost is at most the smallest cost to the diagonal, min death / 2.
    """
    return bool(np.max(np.abs(da - db)) <= min(float(da[0]), float(db[0])) / 2.0)


def pair_costs(a: Diagram, b: Diagram) -> FloatArray:
    """(n, m) L-infinity distances between the points of two diagrams.

    Parameters
    ----------
    a, b : numpy.ndarray
        (n, 2) and (m, 2) finite bars.

    Returns
    -------
    numpy.ndarray
        ``max(|birth_a - birth_b|, |death_a - death_b|)`` for every pair.

    Examples
    --------
    >>> import numpy as np
    >>> pair_costs(np.array([[0.0, 1.0]]), np.array([[0.1, 1.5], [0.0, 0.8]]))
    array([[0.5, 0.2]])
    """
    return np.maximum(np.abs(a[:, None, 0] - b[None, :, 0]), np.abs(a[:, None, 1] - b[None, :, 1]))


def assignment_wasserstein(a: Diagram, b: Diagram, order_p: float) -> float:
    """Wasserstein-p distance of two non-empty diagrams by the square assignment problem (scipy).

    The plain path (see the module notes).

    Parameters
    ----------
    a, b : numpy.ndarray
        (n, 2) and (m, 2) finite bars, n, m >= 1.
    order_p : float

    Returns
    -------
    float
    """
    n, m = len(a), len(b)
    cost = np.zeros((n + m, m + n))
    cost[:n, :m] = pair_costs(a, b) ** order_p
    cost[:n, m:] = np.inf
    cost[n:, :m] = np.inf
    cost[np.arange(n), m + np.arange(n)] = _half_lifetimes(a) ** order_p
    cost[n + np.arange(m), np.arange(m)] = _half_lifetimes(b) ** order_p
    rows, cols = linear_sum_assignment(cost)
    return float(cost[rows, cols].sum() ** (1.0 / order_p))


def reduced_assignment_wasserstein(a: Diagram, b: Diagram, order_p: float, cross: FloatArray | None = None) -> float:
    """Wasserstein-p distance of two non-empty diagrams by the reduced assignment problem (scipy).

    The fast path (see the module notes): points that can only go to the diagonal are set aside,
    and the rest solved as an n x (m + k) assignment with k shared diagonal columns, k grown until
    one is left free (which proves the optimum).

    Parameters
    ----------
    a, b : numpy.ndarray
        (n, 2) and (m, 2) finite bars, n, m >= 1.
    order_p : float
    cross : numpy.ndarray, optional
        ``pair_costs(a, b)`` where already computed.

    Returns
    -------
    float

    Examples
    --------
    The same optimum as the plain square assignment. By hand: (0, 1) <-> (0.1, 1.1) costs 0.1
    (L-infinity) and (0.2, 0.5) goes to the diagonal for half its lifetime, 0.15:

    >>> import numpy as np
    >>> a = np.array([[0.0, 1.0], [0.2, 0.5]])
    >>> b = np.array([[0.1, 1.1]])
    >>> round(reduced_assignment_wasserstein(a, b, 1.0), 12), round(assignment_wasserstein(a, b, 1.0), 12)
    (0.25, 0.25)
    """
    return reduced_assignment_matching(a, b, order_p, cross)[0]


def reduced_assignment_matching(
    a: Diagram, b: Diagram, order_p: float, cross: FloatArray | None = None
) -> tuple[float, float]:
    """:func:`reduced_assignment_wasserstein`, and the largest cost in the optimal matching it found.

    The largest cost (a pair's L-infinity cost or a point's cost to the diagonal, not raised to
    ``order_p``) is that of one matching, so it bounds the bottleneck distance from above:
    :func:`threshold_bottleneck` takes it as ``upper``.

    Parameters
    ----------
    a, b : numpy.ndarray
        (n, 2) and (m, 2) finite bars, n, m >= 1.
    order_p : float
    cross : numpy.ndarray, optional
        ``pair_costs(a, b)`` where already computed.

    Returns
    -------
    tuple of float
        ``(wasserstein, largest cost of its matching)``.

    Examples
    --------
    The matching of the example above: one pair of cost 0.1, one point to the diagonal at 0.15:

    >>> import numpy as np
    >>> a = np.array([[0.0, 1.0], [0.2, 0.5]])
    >>> b = np.array([[0.1, 1.1]])
    >>> tuple(round(x, 12) for x in reduced_assignment_matching(a, b, 1.0))
    (0.25, 0.15)
    """
    cost = pair = pair_costs(a, b) if cross is None else cross
    half_a, half_b = diag_a, diag_b = _half_lifetimes(a), _half_lifetimes(b)
    if order_p != 1.0:
        pair, diag_a, diag_b = pair**order_p, diag_a**order_p, diag_b**order_p
    # a pair dearer than sending both its points to the diagonal is in no optimal matching
    gain = pair - diag_a[:, None] - diag_b[None, :]
    useful = gain < 0.0
    rows, cols = np.flatnonzero(useful.any(axis=1)), np.flatnonzero(useful.any(axis=0))
    paired_cost = largest = 0.0
    matched_a = np.zeros(len(a), dtype=bool)
    matched_b = np.zeros(len(b), dtype=bool)
    if len(rows):
        sub = gain[np.ix_(rows, cols)]
        if len(rows) > len(cols):
            sub = sub.T
        r, c = _shared_diagonal_assignment(sub)
        if len(rows) > len(cols):
            r, c = c, r
        pick_a, pick_b = rows[r], cols[c]
        matched_a[pick_a] = True
        matched_b[pick_b] = True
        paired_cost = float(pair[pick_a, pick_b].sum())
        if len(pick_a):
            largest = float(cost[pick_a, pick_b].max())
    to_diagonal_a, to_diagonal_b = ~matched_a, ~matched_b
    total = paired_cost + diag_a[to_diagonal_a].sum() + diag_b[to_diagonal_b].sum()
    for half, left in ((half_a, to_diagonal_a), (half_b, to_diagonal_b)):
        if left.any():
            largest = max(largest, float(half[left].max()))
    return float(total ** (1.0 / order_p)), largest


def _shared_diagonal_assignment(gain: FloatArray) -> tuple[Positions, Positions]:
    """The pairs (row, column) of a cheapest partial matching of the rows, pair costs ``gain`` (n <= m).

    A row left unmatched costs 0 (``gain`` is a pair's cost minus both points' costs to the
    diagonal, so every partial matching's cost differs from its ``gain`` sum by a constant). Solved
    as an n x (m + k) assignment with k identical zero columns: when one of them stays free, the
    optimal duals give every row u_i <= 0 (the free column's dual is 0), so more zero columns
    would keep the duals feasible and the solution optimal; when none stays free, k doubles.
    """
    n, m = gain.shape
    # about one point in ten goes to the diagonal between consecutive windows: room for 2.5 times that
    shared = min(n, 8 + n // 4)
    while True:
        cost = np.zeros((n, m + shared))
        cost[:, :m] = gain
        r, c = linear_sum_assignment(cost)
        to_pair = c < m
        if shared == n or np.count_nonzero(~to_pair) < shared:
            keep = to_pair & (gain[r, np.minimum(c, m - 1)] < 0.0)
            return r[keep], c[keep]
        shared = min(n, 2 * shared)


def persim_bottleneck(a: Diagram, b: Diagram) -> float:
    """Persim's exact bottleneck distance of two non-empty diagrams of finite bars."""
    from persim import bottleneck

    with warnings.catch_warnings():
        # persim warns about points it drops only for infinite deaths; ours are all finite
        warnings.simplefilter("ignore", UserWarning)
        return float(bottleneck(a, b))


def threshold_bottleneck(a: Diagram, b: Diagram, cross: FloatArray | None = None, upper: float | None = None) -> float:
    """Exact bottleneck distance of two non-empty diagrams: smallest feasible threshold.

    Parameters
    ----------
    a, b : numpy.ndarray
        (n, 2) and (m, 2) finite bars, n, m >= 1.
    cross : numpy.ndarray, optional
        ``pair_costs(a, b)`` where already computed.
    upper : float, optional
        The largest cost of some matching of ``a`` and ``b`` (an upper bound, e.g. from
        :func:`reduced_assignment_matching`): where it equals the lower bound, that is the
        answer and no bipartite matching is tested.

    Returns
    -------
    float
        A pair cost or a diagonal cost, exactly (see the module notes).

    Examples
    --------
    The largest cost of the optimal matching above, (0.2, 0.5) to the diagonal, as persim finds:

    >>> import numpy as np
    >>> a = np.array([[0.0, 1.0], [0.2, 0.5]])
    >>> b = np.array([[0.1, 1.1]])
    >>> threshold_bottleneck(a, b), persim_bottleneck(a, b)
    (0.15, 0.15)
    """
    if cross is None:
        cross = pair_costs(a, b)
    diag_a, diag_b = _half_lifetimes(a), _half_lifetimes(b)
    lower = max(
        float(np.minimum(diag_a, cross.min(axis=1)).max()),
        float(np.minimum(diag_b, cross.min(axis=0)).max()),
    )
    if upper is not None and upper <= lower:
        return lower  # some matching reaches the lower bound
    return _smallest_covering_threshold(cross.T, diag_b, _smallest_covering_threshold(cross, diag_a, lower))


def _smallest_covering_threshold(cross: FloatArray, diag: FloatArray, start: float) -> float:
    """Smallest t >= ``start`` at which the rows with ``diag > t`` have distinct columns within ``cross <= t``.

    ``start`` must not exceed it (a lower bound). Where a maximum matching leaves a row out, the
    rows and columns it reaches by alternating paths (a Hall violator) stay a violator until t
    reaches their cheapest way out; t jumps there (see the module notes).
    """
    t = start
    while True:
        forced = diag > t
        if not forced.any():
            return t
        costs = cross[forced]
        allowed = costs <= t
        match = _maximum_matching(allowed)
        left = match < 0
        if not left.any():
            return t
        owner = np.full(cross.shape[1], -1)
        owner[match[~left]] = np.flatnonzero(~left)
        rows, cols = left, np.zeros(cross.shape[1], dtype=bool)
        while True:
            # the matching is maximum: every column reached from a row left out is matched
            new_cols = allowed[rows].any(axis=0) & ~cols
            if not new_cols.any():
                break
            cols |= new_cols
            rows[owner[new_cols]] = True
        way_out = costs[np.ix_(rows, ~cols)]
        t = min(float(diag[forced][rows].min()), float(way_out.min()) if way_out.size else np.inf)


def _maximum_matching(allowed: BoolArray) -> Positions:
    """Column matched to each row of the bipartite graph ``allowed`` in a maximum matching (-1: none).

    Up to :data:`_SMALL_GRAPH_ROWS` rows by augmenting paths in Python (Kuhn's algorithm): at the
    lower bound of consecutive windows' H1 diagrams a dozen or so points are forced, and building
    scipy's sparse graph costs more than the search (0.09 against 0.16 ms a pair at 50 assets,
    window 60); above it scipy's Hopcroft-Karp (``maximum_bipartite_matching``). Both maximum:
    the searches that read the matching need no more.
    """
    rows, cols = allowed.shape
    r, c = np.nonzero(allowed)
    if rows <= _SMALL_GRAPH_ROWS:
        return _augmenting_matching(rows, cols, r, c)
    indptr = np.zeros(rows + 1, dtype=np.int32)
    np.cumsum(np.bincount(r, minlength=rows), out=indptr[1:])
    graph = csr_matrix((np.ones(len(c), dtype=bool), c.astype(np.int32), indptr), shape=(rows, cols))
    return cast("Positions", maximum_bipartite_matching(graph, perm_type="column"))


_SMALL_GRAPH_ROWS = 48


def _augmenting_matching(rows: int, cols: int, r: Positions, c: Positions) -> Positions:
    """A maximum matching of the graph with edges ``(r[k], c[k])`` (row-major) by Kuhn's augmenting paths."""
    bounds = np.searchsorted(r, np.arange(rows + 1)).tolist()
    targets = c.tolist()
    neighbours = [targets[lo:hi] for lo, hi in zip(bounds[:-1], bounds[1:])]
    owner = [-1] * cols

    def place(row: int, seen: list[bool]) -> bool:
        """Give ``row`` a column, moving earlier rows along an augmenting path where needed."""
        for col in neighbours[row]:
            if not seen[col]:
                seen[col] = True
                if owner[col] < 0 or place(owner[col], seen):
                    owner[col] = row
                    return True
        return False

    for row in range(rows):
        # a free neighbour first (the greedy step), else an augmenting path
        free = next((col for col in neighbours[row] if owner[col] < 0), -1)
        if free >= 0:
            owner[free] = row
        else:
            place(row, [False] * cols)
    match = np.full(rows, -1, dtype=np.int64)
    for col, row in enumerate(owner):
        if row >= 0:
            match[row] = col
    return match
