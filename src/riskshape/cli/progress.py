"""A progress bar for long runs (on stderr, only when it is a terminal)."""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager

from tqdm import tqdm

__all__ = ["progress_bar"]


@contextmanager
def progress_bar(unit: str) -> Iterator[Callable[[int, int], None]]:
    """Yield a ``progress(done, total)`` callback that drives a tqdm bar."""
    bar: tqdm | None = None

    def tick(done: int, total: int) -> None:
        nonlocal bar
        if bar is None:
            bar = tqdm(total=total, unit=unit, file=sys.stderr, disable=None, leave=False)
        bar.update(done - bar.n)

    try:
        yield tick
    finally:
        if bar is not None:
            bar.close()
