"""One kill -9 trial of ``riskshape run``, a service ingest (or correction) or a review, and what it left: shared by
``tests/store/test_kill.py`` (a few trials, asserted) and ``benchmarks/reliability.py`` (many, counted).

A trial kills the operation at one write event (:mod:`tests.kit.fault_point`), compares the archive with
what the child had committed, verifies the chain, redoes the operation uninterrupted and compares the
archive with that of an uninterrupted reference (:func:`tests.kit.crash.archive_view`).
"""

from __future__ import annotations

import signal
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from riskshape import Config
from riskshape.daily import Ingestor
from riskshape.prices import validate_prices
from riskshape.store import open_store, verify_chain
from tests.kit.crash import archive_view, post_prices, read_log, run_cli, start_server, table_counts, wait_killed

View = dict[str, list[tuple[object, ...]]]
KILLED = -signal.SIGKILL


@dataclass(frozen=True)
class Trial:
    """What one kill left, and what redoing the operation gave."""

    operation: str
    kill_at: int
    killed: bool  # the child ended by SIGKILL
    where: str | None  # the write event it died at ("event", "done" or "commit"), from its log
    lost: int  # committed rows missing after the kill
    kept: int  # rows beyond what was committed (half a transaction kept)
    verified: bool  # verify passed after the kill and after the redo
    redone: bool  # the redo succeeded
    duplicated: int  # rows after the redo beyond those of the uninterrupted reference
    missing: dict[str, int]  # rows of the reference absent after the redo, by table

    @property
    def inside_writes(self) -> bool:
        return self.killed and self.where is not None

    @property
    def equal(self) -> bool:
        """The archive after the redo equals the reference's (apart from time stamps and ids)."""
        return self.redone and self.duplicated == 0 and not self.missing


def _compare(got: View, expected: View) -> tuple[int, dict[str, int]]:
    duplicated, missing = 0, {}
    for table in expected.keys() | got.keys():
        have, want = Counter(got.get(table, [])), Counter(expected.get(table, []))
        duplicated += sum((have - want).values())
        if absent := sum((want - have).values()):
            missing[table] = absent
    return duplicated, missing


def _verified(url: str) -> bool:
    with open_store(url, create=False) as store:
        return verify_chain(store).ok


def _after_kill(url: str, log: Path, before: dict[str, int]) -> tuple[str | None, int, int, bool]:
    logged = read_log(log)
    committed, found = logged.committed or before, table_counts(url)
    lost = sum(max(0, committed[t] - found[t]) for t in committed)
    kept = sum(max(0, found[t] - committed[t]) for t in committed)
    return logged.killed_what, lost, kept, _verified(url)


def _trial(operation: str, kill_at: int, killed: bool, after: tuple, redone: bool, url: str, expected: View) -> Trial:
    where, lost, kept, verified = after
    duplicated, missing = _compare(archive_view(url), expected)
    return Trial(
        operation, kill_at, killed, where, lost, kept, verified and _verified(url), redone, duplicated, missing
    )


def kill_cli(
    operation: str, url: str, args: list[str], kill_at: int, folder: Path, expected: View, *, forked: bool = False
) -> Trial:
    """Kill a riskshape command (``args``) at ``kill_at``, check, run it again, compare."""
    before, log = table_counts(url), folder / f"kill{kill_at}.log"
    log.unlink(missing_ok=True)
    killed = run_cli(log, kill_at, args, forked=forked).returncode == KILLED
    after = _after_kill(url, log, before)
    redo = folder / f"redo{kill_at}.log"
    redo.unlink(missing_ok=True)
    redone = run_cli(redo, 0, args, forked=forked).returncode == 0
    return _trial(operation, kill_at, killed, after, redone, url, expected)


def kill_ingest(
    url: str,
    config: Path,
    body: bytes,
    token: str,
    portfolio: str,
    kill_at: int,
    folder: Path,
    expected: View,
    *,
    forked: bool = False,
    correction: bool = False,
) -> Trial:
    """Kill the service (uvicorn) at ``kill_at`` while it ingests ``body`` (``correction``: sent with
    ``correction=true``, the trial's operation then ``correction``), check, re-send it, compare.
    """
    before, log = table_counts(url), folder / f"kill{kill_at}.log"
    log.unlink(missing_ok=True)
    server = start_server(url, config, log, kill_at, folder / f"kill{kill_at}.out", forked=forked)
    try:
        answered = post_prices(server, portfolio, body, token, correction=correction)
        killed = answered is None and wait_killed(server.process) == KILLED
    finally:
        server.stop()
    after = _after_kill(url, log, before)
    redo = folder / f"redo{kill_at}.log"
    redo.unlink(missing_ok=True)
    server = start_server(url, config, redo, 0, folder / f"redo{kill_at}.out", forked=forked)
    try:
        again = post_prices(server, portfolio, body, token, correction=correction)
    finally:
        server.stop()
    redone = again is not None and again.status_code == 200
    operation = "correction" if correction else "ingest"
    return _trial(operation, kill_at, killed, after, redone, url, expected)


# the cells a correction revises: (row, asset's column, factor), on archived days that count
REVISED = ((30, 0, 1.04), (31, 5, 0.97), (52, 11, 1.06))


def revised_prices(prices: pd.DataFrame) -> pd.DataFrame:
    """``prices`` with three archived cells revised (:data:`REVISED`): a correction's body, sent with
    the rest of the prices unchanged.
    """
    revised = prices.copy()
    for row, column, factor in REVISED:
        revised.iloc[row, column] = float(prices.iloc[row, column]) * factor
    return revised


def ingested(url: str, config: Path, prices: pd.DataFrame, portfolio: str = "Fund North") -> str:
    """The portfolio created in the archive at ``url`` and ``prices`` ingested into it (in this process,
    as the service's ingest does: its windows, alerts and day state); an ingest key's token.
    """
    with open_store(url) as store:
        store.create_portfolio(portfolio)
        token = store.create_api_key("feed", "ingest").token
        Ingestor(Config.from_toml(config)).ingest(store, portfolio, validate_prices(prices))
    return token
