"""Which days count: complete, closed, or pending; delistings; the cut-off rule.

A day *counts* (its window is computed and the rules evaluated on it) once it is

* **complete**: every asset listed that day has an archived cell for it (a price, or a price
  sent explicitly as missing); an asset is listed from the portfolio's first day until its last
  trading day, if it was delisted (chained record ``asset_delisted``); or
* **closed**: by hand (chained record ``day_closed``, ``how = "by hand"``), or by the cut-off rule
  (``[daily] close_share``: once that share of its listed assets has a price; recorded the same
  way, ``how = "cut-off share 0.9"``). The assets still absent on a closed day are missing there.

Windows count trading days, so a day counts only if every day before it does: the days after
the first one that does not count wait with it (they are *pending* too). Only days after the
portfolio's latest run are judged; the days a run has seen counted already.

Everything here is pure: the archive's records go in, the decision comes out
(:mod:`riskshape.daily.ingest` reads and writes them).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date

import pandas as pd

__all__ = [
    "DayBook",
    "DayStatus",
    "CLOSED_BY_HAND",
    "cut_off_how",
    "listed_assets",
    "day_statuses",
    "split_counted",
    "closes_by_cut_off",
]

CLOSED_BY_HAND = "by hand"
"""The ``how`` of a day closed with ``riskshape days close`` or the service's close endpoint."""


def cut_off_how(share: float) -> str:
    """The ``how`` of a day closed by the cut-off rule.

    Examples
    --------
    >>> cut_off_how(0.9)
    'cut-off share 0.9'
    """
    return f"cut-off share {share:g}"


@dataclass(frozen=True)
class DayBook:
    """The chained records that decide which days count.

    Attributes
    ----------
    closed : mapping of date to str
        Days closed, with how (``"by hand"`` or ``"cut-off share 0.9"``).
    delisted : mapping of str to date
        Assets delisted, with their last trading day.
    """

    closed: Mapping[date, str] = field(default_factory=dict)
    delisted: Mapping[str, date] = field(default_factory=dict)


@dataclass(frozen=True)
class DayStatus:
    """Where one day stands.

    Attributes
    ----------
    day : datetime.date
    listed : tuple of str
        The assets that must answer for it (the portfolio's, less those delisted before it).
    missing : tuple of str
        Listed assets without an archived cell that day.
    priced : int
        Listed assets with a price (not a missing one) that day.
    closed : str or None
        How the day was closed, if it was.
    """

    day: date
    listed: tuple[str, ...]
    missing: tuple[str, ...]
    priced: int
    closed: str | None

    @property
    def complete(self) -> bool:
        """Every listed asset has a cell for the day."""
        return not self.missing

    @property
    def counts(self) -> bool:
        """Complete, or closed."""
        return self.complete or self.closed is not None

    @property
    def share(self) -> float:
        """Share of the listed assets with a price (1.0 when none is listed)."""
        return self.priced / len(self.listed) if self.listed else 1.0


def listed_assets(assets: Sequence[str], day: date, delisted: Mapping[str, date]) -> tuple[str, ...]:
    """The portfolio's assets still listed on ``day`` (delisted ones count up to their last trading day).

    Examples
    --------
    >>> from datetime import date
    >>> listed_assets(["XA01", "XB01"], date(2031, 3, 4), {"XB01": date(2031, 3, 3)})
    ('XA01',)
    """
    return tuple(a for a in assets if a not in delisted or delisted[a] >= day)


def day_statuses(cells: pd.DataFrame, assets: Sequence[str], book: DayBook) -> tuple[DayStatus, ...]:
    """The status of every day that has archived cells, in date order.

    Parameters
    ----------
    cells : pandas.DataFrame
        Archived cells: columns ``date`` (``datetime.date``), ``asset``, ``price`` (NaN for a
        price archived as missing).
    assets : sequence of str
        The portfolio's assets.
    book : DayBook
        Closed days and delistings.

    Returns
    -------
    tuple of DayStatus
    """
    statuses = []
    for day, group in cells.groupby("date", sort=True):
        plain = pd.Timestamp(day).date()
        listed = listed_assets(assets, plain, book.delisted)
        present = set(group["asset"])
        priced = set(group.loc[group["price"].notna(), "asset"])
        statuses.append(
            DayStatus(
                day=plain,
                listed=listed,
                missing=tuple(a for a in listed if a not in present),
                priced=sum(1 for a in listed if a in priced),
                closed=book.closed.get(plain),
            )
        )
    return tuple(statuses)


def split_counted(statuses: Sequence[DayStatus]) -> tuple[tuple[DayStatus, ...], tuple[DayStatus, ...]]:
    """The days that count (a prefix) and the pending days (from the first that does not count on).

    Examples
    --------
    >>> from datetime import date
    >>> done = DayStatus(date(2031, 3, 3), ("XA01",), (), 1, None)
    >>> wait = DayStatus(date(2031, 3, 4), ("XA01",), ("XA01",), 0, None)
    >>> [len(part) for part in split_counted([done, wait, done])]
    [1, 2]
    """
    for i, status in enumerate(statuses):
        if not status.counts:
            return tuple(statuses[:i]), tuple(statuses[i:])
    return tuple(statuses), ()


def closes_by_cut_off(statuses: Iterable[DayStatus], share: float | None) -> tuple[DayStatus, ...]:
    """The days the cut-off rule closes now: in order, each pending day whose priced share reaches it.

    Stops at the first day that neither counts nor reaches the share (the days after it wait for
    it). ``share`` None (the default configuration) closes nothing.

    Examples
    --------
    >>> from datetime import date
    >>> most = DayStatus(date(2031, 3, 4), ("XA01", "XB01", "XC01"), ("XC01",), 2, None)
    >>> [s.day.day for s in closes_by_cut_off([most], 0.6)], closes_by_cut_off([most], 0.9)
    ([4], ())
    """
    if share is None:
        return ()
    closing = []
    for status in statuses:
        if status.counts:
            continue
        if status.share + 1e-12 < share:
            break
        closing.append(status)
    return tuple(closing)
