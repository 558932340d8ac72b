"""Executors: where batches of windows are computed. Every executor gives the same results.

* ``serial``: in this process;
* ``process``: a local process pool, one process per core by default, BLAS pinned to one thread
  in each worker (two BLAS threads per process were seen to stall small products);
* ``dask``: an existing Dask distributed cluster, given by its scheduler address.
"""

from __future__ import annotations

import multiprocessing
import os
import threading
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor
from typing import Any, Protocol, TypeVar

from riskshape.config import ComputeConfig
from riskshape.errors import ConfigError

__all__ = ["Executor", "SerialExecutor", "ProcessExecutor", "DaskExecutor", "make_executor"]

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
    """Runs every job in this process."""

    def map(self, fn: Callable[..., T], jobs: Sequence[tuple[Any, ...]]) -> Iterator[T]:
        for job in jobs:
            yield fn(*job)

    def close(self) -> None:
        return None


def _pin_blas() -> None:
    from threadpoolctl import threadpool_limits

    threadpool_limits(1)


def _start_method() -> str:
    """``fork`` where it is safe and available (fast start), else ``forkserver`` or ``spawn``."""
    methods = multiprocessing.get_all_start_methods()
    if "fork" in methods and threading.active_count() == 1:
        return "fork"
    return "forkserver" if "forkserver" in methods else "spawn"


class ProcessExecutor:
    """A local process pool, BLAS pinned to one thread per worker."""

    def __init__(self, workers: int = 0) -> None:
        self.workers = workers or os.cpu_count() or 1
        self._pool: ProcessPoolExecutor | None = None

    def map(self, fn: Callable[..., T], jobs: Sequence[tuple[Any, ...]]) -> Iterator[T]:
        if self._pool is None:
            context = multiprocessing.get_context(_start_method())
            self._pool = ProcessPoolExecutor(self.workers, mp_context=context, initializer=_pin_blas)
        futures = [self._pool.submit(fn, *job) for job in jobs]
        for future in futures:
            yield future.result()

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown()
            self._pool = None


class DaskExecutor:
    """Sends jobs to a running Dask distributed scheduler (or to a ``distributed.Client`` given)."""

    def __init__(self, scheduler: str | None = None, client: Any = None) -> None:
        from distributed import Client

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

    def map(self, fn: Callable[..., T], jobs: Sequence[tuple[Any, ...]]) -> Iterator[T]:
        futures = [self.client.submit(fn, *job, pure=False) for job in jobs]
        for future in futures:
            yield future.result()

    def close(self) -> None:
        if self._owns_client:
            self.client.close()


def make_executor(compute: ComputeConfig, n_jobs: int) -> Executor:
    """The executor a configuration asks for; serial when there is only one job to run."""
    if compute.executor == "serial" or (compute.executor == "process" and n_jobs <= 1):
        return SerialExecutor()
    if compute.executor == "process":
        return ProcessExecutor(min(compute.workers or os.cpu_count() or 1, n_jobs))
    return DaskExecutor(compute.scheduler)


def chunk(items: Sequence[T], size: int) -> Iterable[Sequence[T]]:
    """Consecutive slices of ``items`` of at most ``size``."""
    for start in range(0, len(items), size):
        yield items[start : start + size]
