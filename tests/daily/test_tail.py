"""A new day reads a bounded tail: the windows it completes, computed from the tail and the previous
window's archived diagrams, equal a full run's; the SQL it sends does not grow with the history.

The reference is :func:`riskshape.monitor` over the whole history (the batch path). Statements are
counted with SQLAlchemy's ``before_cursor_execute`` event on a store opened afresh (as after a
restart: nothing in memory).
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import event

from riskshape import Config, archive_run, monitor
from riskshape.daily.tail import read_tail, tail_span, tail_windows
from riskshape.store import Store, open_store
from tests.kit.archive import walk_prices
from tests.kit.assets import codes

ASSETS = codes(8)


@contextmanager
def _statements(store: Store) -> Iterator[list[str]]:
    seen: list[str] = []

    def count(conn: object, cursor: object, statement: str, *args: object) -> None:
        seen.append(statement)

    event.listen(store.engine, "before_cursor_execute", count)
    try:
        yield seen
    finally:
        event.remove(store.engine, "before_cursor_execute", count)


def _history(rng: np.random.Generator, n_days: int) -> pd.DataFrame:
    prices = walk_prices(rng, n_days=n_days, assets=ASSETS)
    prices.iloc[n_days // 2, 3] = np.nan  # a gap: a missing price makes two missing returns
    return prices


@pytest.mark.parametrize(
    "window,step,new_days",
    [(20, 1, 1), (20, 1, 3), (15, 4, 4), (10, 12, 12)],
    ids=["daily-one-day", "daily-three-days", "step-4", "step-over-window"],
)
def test_tail_windows_equal_a_full_run(
    tmp_path: Path, rng: np.random.Generator, window: int, step: int, new_days: int
) -> None:
    config = Config(window=window, step=step, maxdim=1, compute={"executor": "serial"})
    prices = _history(rng, 400)
    held, now = len(prices) - new_days, len(prices)
    url = f"sqlite:///{tmp_path / 'tail.sqlite'}"
    with open_store(url) as store:
        archive_run(store, "alpha", monitor(prices.iloc[:held], config), explain=False)
        store.append_prices("alpha", prices.iloc[held:], source="new days")
    full = monitor(prices, config)
    span = tail_span(held, now, config)
    assert len(span.new_ends) >= 1 and span.n_rows < now
    with open_store(url) as fresh:  # a restart: nothing in memory
        tail = read_tail(fresh, "alpha", list(ASSETS), span, prices.index[-1].date(), config)
    ends, windows = tail_windows(tail, config)
    assert len(tail.prices) == span.n_rows
    expected = full.window_ends[span.windows_before :]
    assert ends.equals(expected)
    for got, want in zip(windows, full.windows[span.windows_before :]):
        np.testing.assert_array_equal(got.used, want.used)
        np.testing.assert_array_equal(got.summaries, want.summaries)  # bit for bit: same rows, same order
        np.testing.assert_array_equal(got.distances, want.distances)
        for a, b in zip(got.diagrams, want.diagrams):
            np.testing.assert_array_equal(a, b)


def test_the_tail_read_does_not_grow_with_the_history(tmp_path: Path, rng: np.random.Generator) -> None:
    config = Config(window=20, step=1, maxdim=1, compute={"executor": "serial"})
    counts, rows = [], []
    for n_days in (200, 1000):
        prices = _history(rng, n_days)
        url = f"sqlite:///{tmp_path / f'h{n_days}.sqlite'}"
        with open_store(url) as store:
            archive_run(store, "alpha", monitor(prices.iloc[:-1], config), explain=False)
            store.append_prices("alpha", prices.iloc[-1:], source="new day")
        span = tail_span(n_days - 1, n_days, config)
        with open_store(url) as fresh, _statements(fresh) as seen:
            tail = read_tail(fresh, "alpha", list(ASSETS), span, prices.index[-1].date(), config)
        counts.append(len(seen))
        rows.append(tail.prices.shape[0])
        assert tail.prices.shape[0] == span.n_rows and tail.prices.index[-1] == prices.index[-1]
    assert counts[0] == counts[1]  # the same statements for five times the history
    # the window, its returns' base row, and at most the running sums' rebuild span (moments.RECOMPUTE_EVERY)
    assert max(rows) <= config.window + 1 + 64
