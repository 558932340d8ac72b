"""Many writers at once on one archive: forked processes that each open the archive, wait at one
barrier and then run a run, an ingest or a review through riskshape's public API.

Forked (not spawned) so that each writer starts with the test's imports and computed result in
memory and the barrier releases them within milliseconds of each other. Each writer reports
``("ok", detail)`` or ``("refused", message)`` for one of riskshape's own errors (a workflow refusal,
say); anything else is ``("crash", message)``.
"""

from __future__ import annotations

import multiprocessing
import traceback
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import pandas as pd

from riskshape import Config, archive_run, validate_prices
from riskshape.compute.monitor import MonitorResult
from riskshape.daily import Ingestor
from riskshape.errors import RiskshapeError
from riskshape.reviews import review_alert
from riskshape.store import Store, open_store

Work = Callable[[Store], object]

# words of a lock failure, a serialisation failure or a lost race (a duplicate key), which must never reach a user
RACE_WORDS = ("locked", "busy", "deadlock", "could not serialize", "lock timeout", "unique constraint")


@dataclass(frozen=True)
class Outcome:
    """What one writer saw."""

    status: str  # "ok", "refused" or "crash"
    detail: Any

    @property
    def lock_error(self) -> bool:
        text = str(self.detail).lower()
        return self.status != "ok" and any(word in text for word in RACE_WORDS)


def _writer(url: str, work: Work, barrier: Any, results: Any, slot: int) -> None:
    try:
        with open_store(url) as store:
            barrier.wait(timeout=120)
            results.put((slot, "ok", work(store)))
    except RiskshapeError as err:
        results.put((slot, "refused", str(err)))
    except BaseException:  # the writer's own failure, shown to the test
        results.put((slot, "crash", traceback.format_exc()))


def at_once(url: str, works: list[Work], timeout: float = 600) -> list[Outcome]:
    """Run every work in its own forked process, all released together; their outcomes in order."""
    context = multiprocessing.get_context("fork")
    barrier = context.Barrier(len(works))
    results = context.Queue()
    processes = [
        context.Process(target=_writer, args=(url, work, barrier, results, slot), daemon=True)
        for slot, work in enumerate(works)
    ]
    for process in processes:
        process.start()
    got: dict[int, Outcome] = {}
    try:
        for _ in works:
            slot, status, detail = results.get(timeout=timeout)
            got[slot] = Outcome(status, detail)
    finally:
        for process in processes:
            process.join(timeout=30)
            if process.is_alive():
                process.kill()
    return [got[slot] for slot in range(len(works))]


def run_work(result: MonitorResult, portfolio: str, store: Store) -> int:
    """Archive a computed run (``riskshape run`` without the computing); the number of alerts it added."""
    return len(archive_run(store, portfolio, result).alerts.added)


def ingest_work(prices: pd.DataFrame, config: Config, portfolio: str, store: Store) -> tuple[int, int, int]:
    """Ingest prices as the service does; (prices added, windows added, alerts raised)."""
    report = Ingestor(config).ingest(store, portfolio, validate_prices(prices))
    return report.prices_added, report.windows_added, len(report.alerts)


def review_work(alert_id: int, reviewer: str, store: Store) -> int:
    """Acknowledge an alert; the review's place in the ledger."""
    return review_alert(store, alert_id, "acknowledge", reviewer).seq
