"""H1 explanation: a representative cycle of points for each of the most persistent loops.

Method. ripser computes persistent *cohomology* and, with ``do_cocycles=True``, returns for each
H1 bar [b, d) a representative cocycle: a set of edges (with coefficients mod 2 here) on which
every 1-cycle of the Rips complex at a scale in [b, d) that carries the class pairs non-trivially
(de Silva, Morozov & Vejdemo-Johansson 2011, "Persistent cohomology and circular coordinates",
Discrete Comput. Geom. 45:737-759; Bauer 2021, "Ripser", J. Appl. Comput. Topol. 5:391-423). A
cycle is recovered from it as follows:

1. the *birth edge* is the cocycle edge whose length equals the bar's birth (ripser's values are
   float32; the nearest one is taken);
2. in the Rips 1-skeleton at the birth scale (edges of length <= b), every cocycle edge is
   removed, and the shortest path between the birth edge's endpoints is found
   (:func:`scipy.sparse.csgraph.shortest_path`), edges weighted by their *squared* length so that
   the path prefers several short hops to one long chord (power-weighted shortest paths; on points
   in convex position on a circle it visits every point between the endpoints);
3. the path closed by the birth edge is the cycle. It meets the cocycle in the birth edge only, so
   its pairing with the cocycle is non-zero: it carries the loop's class. If no path exists at the
   birth scale (it should always exist: the birth edge joins points already connected), the
   scales (b + d) / 2 and just below d are tried.

The cycle is written starting from its first point in column order, in the direction of that
point's lower-positioned neighbour on the cycle.

Lifetime (our own rule): going back one window at a time, the loop is matched to the loop (among
that window's ``n_loops + 2`` most persistent) whose members overlap most, if their Jaccard
overlap is at least ``min_overlap``; the next step back follows the matched loop's members;
the run of consecutive matched windows (the alert window included) is ``windows_alive``. The
search stops at ``lookback`` earlier windows.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from ripser import ripser
from scipy.sparse.csgraph import csgraph_from_dense, shortest_path

from riskshape.explain.geometry import WindowGeometry
from riskshape.explain.model import Loop, LoopExplanation, Members, rounded
from riskshape.types import BoolArray, DistanceMatrix, Float32Array, IntArray

__all__ = [
    "Cycle",
    "METHOD",
    "representative_cycles",
    "cycle_from_cocycle",
    "canonical_cycle",
    "jaccard",
    "track_loop",
    "explain_loops",
]

METHOD = (
    "representative cycle from ripser's persistent cocycle: shortest path (squared edge lengths) between "
    "the birth edge's endpoints in the Rips graph at the birth scale without the cocycle's edges, closed "
    "by the birth edge (de Silva, Morozov & Vejdemo-Johansson 2011)"
)


@dataclass(frozen=True)
class Cycle:
    """One H1 bar and a representative cycle, as point positions in cycle order."""

    birth: float
    death: float
    points: tuple[int, ...]
    cocycle_edges: tuple[tuple[int, int], ...]


def canonical_cycle(points: list[int]) -> tuple[int, ...]:
    """Rotate a cycle to start at its smallest position, heading to the smaller of its two neighbours.

    Examples
    --------
    >>> canonical_cycle([5, 2, 7, 0, 3])
    (0, 3, 5, 2, 7)
    """
    if len(points) < 3:
        return tuple(points)
    k = points.index(min(points))
    rotated = points[k:] + points[:k]
    if rotated[-1] < rotated[1]:
        rotated = [rotated[0]] + rotated[:0:-1]
    return tuple(rotated)


def _path(distance32: Float32Array, scale: np.float32, banned: BoolArray, source: int, target: int) -> list[int] | None:
    """Shortest path source -> target over edges of length <= scale that are not banned."""
    weights = np.where((distance32 <= scale) & ~banned, distance32.astype(float) ** 2, np.inf)
    np.fill_diagonal(weights, np.inf)
    graph = csgraph_from_dense(weights, null_value=np.inf)
    _, predecessors = shortest_path(graph, directed=False, indices=source, return_predecessors=True)
    if predecessors[target] < 0:
        return None
    path = [target]
    while path[-1] != source:
        path.append(int(predecessors[path[-1]]))
    return path[::-1]


def cycle_from_cocycle(distance: DistanceMatrix, birth: float, death: float, cocycle: IntArray) -> Cycle | None:
    """Recover a representative cycle of one H1 bar from its ripser cocycle (see the module notes).

    Parameters
    ----------
    distance : numpy.ndarray
        (n, n) distance matrix given to ripser.
    birth, death : float
        The bar.
    cocycle : numpy.ndarray
        (k, 3) rows ``i, j, value`` as ripser returns them.

    Returns
    -------
    Cycle or None
        None if no cycle could be closed (not expected; see the module notes).
    """
    distance32 = distance.astype(np.float32)
    support = np.asarray(cocycle, dtype=np.int64).reshape(-1, 3)
    support = support[support[:, 2] % 2 != 0]
    if len(support) == 0:
        return None
    i, j = support[:, 0], support[:, 1]
    k = int(np.argmin(np.abs(distance32[i, j].astype(float) - birth)))
    u, v = int(i[k]), int(j[k])
    banned = np.zeros(distance.shape, dtype=bool)
    banned[i, j] = banned[j, i] = True
    below_death = float(np.nextafter(np.float32(death), np.float32(-np.inf)))
    for scale in (birth, (birth + death) / 2.0, below_death):
        path = _path(distance32, np.float32(scale), banned, u, v)
        if path is not None:
            edges = tuple(sorted((int(min(a, b)), int(max(a, b))) for a, b in zip(i, j)))
            return Cycle(float(birth), float(death), canonical_cycle(path), edges)
    return None


def representative_cycles(distance: DistanceMatrix, n_loops: int = 3) -> list[Cycle]:
    """The ``n_loops`` most persistent H1 bars of a distance matrix, each with a representative cycle.

    Parameters
    ----------
    distance : numpy.ndarray
        (n, n) symmetric distance matrix, zero diagonal.
    n_loops : int
        How many bars (most persistent first; ties by earlier birth).

    Returns
    -------
    list of Cycle
    """
    if distance.shape[0] < 4 or n_loops <= 0:  # a Rips loop needs at least 4 points
        return []
    out = ripser(distance, maxdim=1, distance_matrix=True, do_cocycles=True)
    bars = np.asarray(out["dgms"][1], dtype=np.float32).astype(float).reshape(-1, 2)
    cocycles = out["cocycles"][1]
    finite = np.flatnonzero(np.isfinite(bars[:, 1]) & (bars[:, 1] > bars[:, 0]))
    order = finite[np.lexsort((bars[finite, 0], -(bars[finite, 1] - bars[finite, 0])))]
    cycles = []
    for index in order[:n_loops]:
        cycle = cycle_from_cocycle(distance, bars[index, 0], bars[index, 1], cocycles[index])
        if cycle is not None:
            cycles.append(cycle)
    return cycles


def jaccard(a: Members, b: Members) -> float:
    """|a & b| / |a | b| of two member lists (0 for two empty lists)."""
    union = set(a) | set(b)
    return len(set(a) & set(b)) / len(union) if union else 0.0


def track_loop(
    members: Members, loops_before: Callable[[int], list[Members]], n_before: int, min_overlap: float
) -> int:
    """Count earlier windows, newest first, that each hold a loop matching the one after it.

    Parameters
    ----------
    members : tuple of str
        The loop in the alert window.
    loops_before : callable
        ``loops_before(k)`` gives the members of the loops of the k-th earlier window (0 = the one
        just before the alert window); called only as far as the run goes.
    n_before : int
        Earlier windows available.
    min_overlap : float
        Least Jaccard overlap for a match.

    Returns
    -------
    int
        Number of consecutive earlier windows matched.

    Examples
    --------
    >>> earlier = [[("a", "b", "c", "d")], [("a", "b", "c", "e")], [("x", "y", "z", "w")]]
    >>> track_loop(("a", "b", "c", "d"), earlier.__getitem__, 3, 0.5)
    2
    """
    current = members
    for k in range(n_before):
        loops = loops_before(k)
        scores = [jaccard(current, other) for other in loops]
        if not scores or max(scores) < min_overlap:
            return k
        current = loops[int(np.argmax(scores))]
    return n_before


def explain_loops(
    current: WindowGeometry,
    earlier: Sequence[WindowGeometry],
    *,
    n_loops: int = 3,
    min_overlap: float = 0.5,
    reaches_first_window: bool = False,
) -> LoopExplanation:
    """The most persistent loops of a window, their cycles and how long they have lived.

    Parameters
    ----------
    current : WindowGeometry
        The alert window.
    earlier : sequence of WindowGeometry
        Earlier windows, newest first (as far back as the search may look).
    n_loops : int
        Loops to report.
    min_overlap : float
        Least Jaccard overlap of members for a loop to count as the same in the window before.
    reaches_first_window : bool
        True if ``earlier`` ends with the run's first window (a run that uses them all is then
        complete, not cut off by the search limit).

    Returns
    -------
    LoopExplanation
    """
    cache: dict[int, list[Members]] = {}

    def loops_before(k: int) -> list[Members]:
        if k not in cache:
            g = earlier[k]
            cache[k] = [tuple(g.points[p] for p in c.points) for c in representative_cycles(g.distance, n_loops + 2)]
        return cache[k]

    loops = []
    for cycle in representative_cycles(current.distance, n_loops):
        members = tuple(current.points[p] for p in cycle.points)
        matched = track_loop(members, loops_before, len(earlier), min_overlap)
        first_seen = earlier[matched - 1].window_end if matched else current.window_end
        exhausted = matched == len(earlier) and not reaches_first_window
        loops.append(Loop(rounded(cycle.birth), rounded(cycle.death), members, matched + 1, first_seen, exhausted))
    return LoopExplanation(window_end=current.window_end, loops=tuple(loops), method=METHOD)
