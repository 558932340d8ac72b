"""What the pollers read, kept in memory between writes: each portfolio's features series under its
latest configuration, and its latest state.

A snapshot is keyed by the portfolio's change marker (:func:`riskshape.store.change_marker`): its
latest run and the highest id of its window rows (the archive is append-only, so rows never change
afterwards and new ones get higher ids). The latest state also depends on the alerts, so it is
keyed by the ledger's head as well. The marker is read from the archive on every request, so
several processes serving one archive stay consistent.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from dataclasses import dataclass, field
from datetime import date

import pandas as pd

from riskshape import Config, DataError
from riskshape.store import ChangeMarker, FeaturesPage, Run, Store

__all__ = ["Snapshot", "Snapshots"]


@dataclass
class Snapshot:
    """A portfolio's series as of one run (``run`` is None before the first)."""

    run: Run | None
    config: Config
    frame: pd.DataFrame
    key: tuple[int | None, int | None] = (None, None)  # the marker's series key it was read at
    latest: dict[tuple[int, str], object] = field(default_factory=dict)  # ledger head -> latest state

    def page(
        self, *, start: date | None, end: date | None, columns: list[str] | None, limit: int, offset: int
    ) -> FeaturesPage:
        """A page of the series, as :meth:`riskshape.store.Store.read_features` would give it."""
        frame = self.frame
        if columns:
            unknown = [c for c in columns if c not in frame.columns]
            if unknown and len(frame.columns):
                raise DataError(
                    f"query 'summaries': no summary {unknown[0]!r}; archived summaries are {', '.join(frame.columns)}"
                )
            frame = frame[[c for c in columns if c in frame.columns]]
        if start is not None:
            frame = frame[frame.index >= pd.Timestamp(start)]
        if end is not None:
            frame = frame[frame.index <= pd.Timestamp(end)]
        return FeaturesPage(
            frame=frame.iloc[offset : offset + limit],
            total=len(frame),
            offset=offset,
            config_hash=None if self.run is None else self.run.config_hash,
        )


class Snapshots:
    """Snapshots of the most recently read portfolios (least recently used dropped first).

    Parameters
    ----------
    default_config : Config
        The configuration of a portfolio without runs.
    size : int
        Portfolios kept at most (``snapshot_cache_size``).
    """

    def __init__(self, default_config: Config, size: int = 32) -> None:
        self.default_config = default_config
        self.size = size
        self._held: OrderedDict[str, Snapshot] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, store: Store, portfolio: str, marker: ChangeMarker) -> Snapshot:
        """The portfolio's snapshot, read again from the archive if ``marker`` says its series changed.

        Raises
        ------
        NotFoundError
            If the portfolio does not exist.
        """
        with self._lock:
            held = self._held.get(portfolio)
            if held is not None and held.key == marker.series_key:
                self._held.move_to_end(portfolio)  # a hit counts as a use
                return held
        run = store.latest_run(portfolio) if marker.run_id is not None else None
        if run is None:
            made = Snapshot(None, self.default_config, pd.DataFrame(index=pd.DatetimeIndex([], name="window_end")))
        else:
            config = Config.from_mapping(run.config, where=f"run {run.id} of portfolio {portfolio!r}")
            made = Snapshot(run, config, store.read_features(portfolio, config_hash=run.config_hash).frame)
        made.key = marker.series_key
        with self._lock:
            self._held[portfolio] = made
            self._held.move_to_end(portfolio)
            while len(self._held) > self.size:
                self._held.popitem(last=False)
        return made
