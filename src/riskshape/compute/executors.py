"""Executors: where batches of windows are computed. Every executor gives the same results.

* ``serial``: in this process;
* ``process``: a local process pool, one process per core available to this process by default,
  BLAS pinned to one thread in each worker (two BLAS threads per process were seen to stall
  small products). Workers are forked where that is safe, after the parent has imported the
  libraries the work needs (``preload``), so no worker pays for importing them again: those
  imports (giotto-ph pulls in scikit-learn) take about a second, as long as a
  small run itself; with another start method the same preload runs in each worker instead;
* ``dask``: an existing Dask distributed cluster, given by its scheduler address; each worker
  process pins its BLAS to one thread on its first job.
"""

from __future__ import annotations

import multiprocessing
import os
import threading
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor
from contextlib import AbstractContextManager, nullcontext
from typing import TYPE_CHECKING, Any, Protocol, TypeVar, cast

from riskshape.errors import ConfigError

if TYPE_CHECKING:  # annotations only: the CLI pins BLAS through this module without loading pydantic
    from riskshape.config import ComputeConfig

__all__ = [
    "Executor",
    "SerialExecutor",
    "ProcessExecutor",
    "DaskExecutor",
    "make_executor",
    "available_cores",
    "keep_blas_pinned",
]

T = TypeVar("T")


class Executor(Protocol):
    """Maps a function over argument tuples, yielding results in order."""

    def map(self, fn: Callable[..., T], jobs: Sequence[tuple[Any, ...]]) -> Iterator[T]:
        """Yield ``fn(*job)`` for each job, in order."""
        ...

    def close(self) -> None:
        """Release workers."""
        ...


class SerialExecutor:
    """Runs every job in this process, with BLAS pinned to one thread while it does.

    Pinned because a second BLAS thread makes the small products of one window stall when the
    cores are busy: 5 ms instead of 0.07 ms for the running sums of 100 assets (measured on 2
    cores under load); the results are the same either way.
    """

    def map(self, fn: Callable[..., T], jobs: Sequence[tuple[Any, ...]]) -> Iterator[T]:
        """``fn(*job)`` for each job, in order, in this process with BLAS on one thread.

        Examples
        --------
        >>> list(SerialExecutor().map(divmod, [(7, 2), (9, 4)]))
        [(3, 1), (2, 1)]
        """
        with _one_blas_thread():
            for job in jobs:
                yield fn(*job)

    def close(self) -> None:
        """Nothing to release."""
        return None


# True in a process whose BLAS is pinned to one thread for its whole life: a worker (pinned by
# itself, or inherited from the parent that forked it), or a process that asked for it
_BLAS_PINNED = False
_PIN_FOR_GOOD = False


def keep_blas_pinned() -> None:
    """Pin BLAS to one thread for the rest of this process's life, at the first run.

    For riskshape's own processes (the CLI, and the service it starts). Elsewhere (a notebook,
    a caller's program) BLAS is pinned only while windows are computed and restored after; but
    each restore wakes BLAS threads that then spin for about 0.1 s, which slows whatever runs
    next on a small machine: back-to-back one-day updates of a 100-asset portfolio took 11 ms
    each that way, 7 ms with BLAS pinned for good.
    """
    global _PIN_FOR_GOOD
    _PIN_FOR_GOOD = True


def _one_blas_thread() -> AbstractContextManager[Any]:
    """BLAS on one thread inside the block: for good where this process keeps it so, else restored after.

    Never pinned again where it is pinned for good already: pinning wakes BLAS threads too.
    """
    if _BLAS_PINNED:
        return nullcontext()
    if _PIN_FOR_GOOD:
        _pin_blas()
        return nullcontext()
    return cast(AbstractContextManager[Any], _controller().limit(limits=1))


# threadpoolctl's view of the loaded BLAS and OpenMP libraries, and the number of imported
# modules when it was taken: finding the libraries costs 2.8 ms of CPU a call (a walk over the
# process's shared objects), a one-day update of 100 assets about 12 ms in all; setting and
# restoring the limits of known libraries 0.03 ms
_CONTROLLER: tuple[int, Any] | None = None


def _controller() -> Any:
    """A ``threadpoolctl.ThreadpoolController``, found again only after an import (which may load a library)."""
    global _CONTROLLER
    import sys

    from threadpoolctl import ThreadpoolController

    if _CONTROLLER is None or _CONTROLLER[0] != len(sys.modules):
        _CONTROLLER = (len(sys.modules), ThreadpoolController())
    return _CONTROLLER[1]


def _pin_blas() -> None:
    global _BLAS_PINNED
    # the pin covers only the BLAS and OpenMP libraries loaded already: load those a window
    # uses first (``import riskshape`` loads none of them; a spawned worker has none yet)
    from threadpoolctl import threadpool_limits

    import riskshape.compute.batch  # noqa: F401

    threadpool_limits(1)
    _BLAS_PINNED = True


def _start_worker(preload: Callable[[], None] | None, pin: bool) -> None:
    global _BLAS_PINNED
    if preload is not None:
        preload()  # first: the libraries it loads are then pinned too
    if pin:
        _pin_blas()
    else:
        _BLAS_PINNED = True  # inherited from the parent that forked this worker


def available_cores() -> int:
    """Cores this process may run on (its CPU affinity where the OS tells it, else the CPU count).

    Returns
    -------
    int
        At least 1.
    """
    if hasattr(os, "sched_getaffinity"):
        return max(1, len(os.sched_getaffinity(0)))
    return os.cpu_count() or 1


def _start_method() -> str:
    """``fork`` where it is safe and available (fast start), else ``forkserver`` or ``spawn``."""
    methods = multiprocessing.get_all_start_methods()
    if "fork" in methods and threading.active_count() == 1:
        return "fork"
    return "forkserver" if "forkserver" in methods else "spawn"


class ProcessExecutor:
    """A local process pool, BLAS pinned to one thread per worker.

    Parameters
    ----------
    workers : int
        Processes; 0 means one per available core.
    preload : callable, optional
        Imports the work needs, run before the workers start (see the module notes); must be
        picklable (a module-level function or a ``functools.partial`` of one).
    """

    def __init__(self, workers: int = 0, preload: Callable[[], None] | None = None) -> None:
        self.workers = workers or available_cores()
        self.preload = preload
        self._pool: ProcessPoolExecutor | None = None

    def map(self, fn: Callable[..., T], jobs: Sequence[tuple[Any, ...]]) -> Iterator[T]:
        """``fn(*job)`` for each job on the pool's workers, yielded in job order (the pool starts on first use)."""
        if self._pool is None:
            method = _start_method()
            forked = method == "fork"
            if forked and self.preload is not None:
                self.preload()  # the forked workers inherit the imported modules
            self._pool = ProcessPoolExecutor(
                self.workers,
                mp_context=multiprocessing.get_context(method),
                initializer=_start_worker,
                initargs=(None if forked else self.preload, not forked),
            )
        # BLAS stays pinned in this process while the workers run, so that forked workers
        # inherit one BLAS thread and never pin it themselves: pinning in a forked child, or
        # unpinning here, starts BLAS threads that spin for about 70 ms on a core a worker needs
        # (the first batch of each worker took 0.25 s instead of 0.14 s, 100 assets, window 60,
        # 2 cores).
        with _one_blas_thread():
            futures = [self._pool.submit(fn, *job) for job in jobs]  # the first submit forks
            for future in futures:
                yield future.result()

    def close(self) -> None:
        """Shut the worker processes down (a later ``map`` starts new ones)."""
        if self._pool is not None:
            self._pool.shutdown()
            self._pool = None


class DaskExecutor:
    """Sends jobs to a running Dask distributed scheduler (or to a ``distributed.Client`` given)."""

    def __init__(self, scheduler: str | None = None, client: Any = None) -> None:
        try:
            from distributed import Client
        except ModuleNotFoundError:
            raise ConfigError(
                "executor 'dask' needs Dask distributed: pip install 'riskshape[dask]', or set executor = 'process'"
            ) from None

        if client is None:
            if not scheduler:
                raise ConfigError("executor 'dask' needs a scheduler address (--scheduler tcp://HOST:8786)")
            try:
                client = Client(scheduler, timeout="10s")
            except (OSError, TimeoutError) as err:
                raise ConfigError(f"cannot reach the Dask scheduler at {scheduler!r}: {err}") from None
            self._owns_client = True
        else:
            self._owns_client = False
        self.client = client

    @property
    def workers(self) -> int:
        """Threads across the cluster's workers (jobs it runs at once)."""
        try:
            threads = self.client.nthreads()
        except (OSError, TimeoutError):  # pragma: no cover - a cluster gone away
            return 1
        return max(1, cast(int, sum(threads.values())))

    def map(self, fn: Callable[..., T], jobs: Sequence[tuple[Any, ...]]) -> Iterator[T]:
        """``fn(*job)`` for each job on the cluster's workers (BLAS pinned there), yielded in job order."""
        futures = [self.client.submit(_pinned_call, fn, *job, pure=False) for job in jobs]
        for future in futures:
            yield future.result()

    def close(self) -> None:
        """Close the client if this executor opened it (a client given by the caller stays open)."""
        if self._owns_client:
            self.client.close()


def _pinned_call(fn: Callable[..., T], *args: Any) -> T:
    """Run ``fn(*args)`` with BLAS pinned to one thread in this (worker) process."""
    if not _BLAS_PINNED:
        _pin_blas()
    return fn(*args)


def make_executor(compute: ComputeConfig, n_jobs: int, preload: Callable[[], None] | None = None) -> Executor:
    """The executor a configuration asks for; serial when there is only one job to run.

    ``preload`` is handed to a local process pool (see :class:`ProcessExecutor`).

    Parameters
    ----------
    compute : ComputeConfig
        The ``[compute]`` section: executor, workers, scheduler.
    n_jobs : int
        How many jobs will be mapped (no more workers than jobs).
    preload : callable, optional
        Run once in a local pool's parent (or each worker) before the jobs.

    Returns
    -------
    Executor
        A serial, process-pool or Dask executor.

    Examples
    --------
    A process pool is not started for a single job:

    >>> from riskshape.config import ComputeConfig
    >>> type(make_executor(ComputeConfig(executor="process"), n_jobs=1)).__name__
    'SerialExecutor'
    >>> type(make_executor(ComputeConfig(executor="serial"), n_jobs=8)).__name__
    'SerialExecutor'
    """
    if compute.executor == "dask":
        return DaskExecutor(compute.scheduler)
    workers = min(compute.workers or available_cores(), n_jobs)
    if compute.executor == "serial" or workers <= 1:
        return SerialExecutor()
    return ProcessExecutor(workers, preload=preload)
