"""Where a run's time goes: seconds by stage, measured with ``time.perf_counter`` where the work runs.

A :class:`StageClock` is carried through a batch of windows (in the worker that computes it) and
charges the time since its last mark to the stage just finished; :data:`NO_CLOCK` does nothing, so
a run that is not profiled pays one no-op call per stage. The batches' :class:`StageTimes` are summed
in the parent, which adds what only it sees: the hand-off to the workers (pickling, queueing, idle
workers) and the writing of the results.

Stages, in the order a window meets them:

* ``correlation``: selecting the admitted assets and their correlation (running sums or plain);
* ``baselines``: the window's baselines, where asked for (``monitor(..., baselines=True)``);
* ``distance_matrix``: the distance matrix of the embedding;
* ``persistence``: the Vietoris-Rips diagrams (the floor of a window's cost);
* ``summaries``: the per-diagram summaries and the compact storage of the bars;
* ``distances``: Wasserstein and bottleneck distances to the previous window's diagrams;
* ``handoff``: the workers' time not spent in the stages above (shipping batches and results,
  queueing, idle workers at the end of a run); in a serial run, the loop's own overhead;
* ``writing``: the run folder and the archive (measured by the caller, the CLI).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, fields

__all__ = ["StageTimes", "StageClock", "NO_CLOCK", "STAGE_NAMES"]


@dataclass(frozen=True)
class StageTimes:
    """Seconds spent in each stage of a run (summed over windows and workers)."""

    correlation: float = 0.0
    baselines: float = 0.0
    distance_matrix: float = 0.0
    persistence: float = 0.0
    summaries: float = 0.0
    distances: float = 0.0
    handoff: float = 0.0
    writing: float = 0.0

    def __add__(self, other: StageTimes) -> StageTimes:
        """Stage by stage sum."""
        return StageTimes(*(getattr(self, name) + getattr(other, name) for name in STAGE_NAMES))

    def with_stage(self, name: str, seconds: float) -> StageTimes:
        """A copy with ``seconds`` added to stage ``name``.

        Parameters
        ----------
        name : str
            One of :data:`STAGE_NAMES`.
        seconds : float
            Time to add.

        Returns
        -------
        StageTimes

        Examples
        --------
        >>> StageTimes().with_stage("writing", 0.5).writing
        0.5
        """
        return StageTimes(**{n: getattr(self, n) + (seconds if n == name else 0.0) for n in STAGE_NAMES})

    @property
    def total(self) -> float:
        """Sum over all stages."""
        return float(sum(getattr(self, name) for name in STAGE_NAMES))

    def rows(self) -> list[tuple[str, float, float]]:
        """``(stage, seconds, share of the total)`` per stage, in :data:`STAGE_NAMES` order.

        Returns
        -------
        list of tuple
            The share is 0 where the total is 0.
        """
        total = self.total
        return [(name, getattr(self, name), getattr(self, name) / total if total > 0 else 0.0) for name in STAGE_NAMES]


STAGE_NAMES: tuple[str, ...] = tuple(f.name for f in fields(StageTimes))


class StageClock:
    """Charges the time since the last mark to a stage (``time.perf_counter``)."""

    __slots__ = ("_last", "_seconds")

    def __init__(self) -> None:
        self._seconds = dict.fromkeys(STAGE_NAMES, 0.0)
        self._last = time.perf_counter()

    def restart(self) -> None:
        """Start the next interval now (time since the last mark is charged to no stage)."""
        self._last = time.perf_counter()

    def mark(self, stage: str) -> None:
        """Charge the time since the last mark (or restart) to ``stage``."""
        now = time.perf_counter()
        self._seconds[stage] += now - self._last
        self._last = now

    def times(self) -> StageTimes:
        """The seconds charged so far."""
        return StageTimes(**self._seconds)


class _NoClock(StageClock):
    """A clock that measures nothing (a run that is not profiled)."""

    __slots__ = ()

    def __init__(self) -> None:
        self._seconds = dict.fromkeys(STAGE_NAMES, 0.0)
        self._last = 0.0

    def restart(self) -> None:
        """Nothing."""

    def mark(self, stage: str) -> None:
        """Nothing."""


NO_CLOCK: StageClock = _NoClock()
