"""A fictional market with known regimes, for the demo, the tests and the notebooks.

Six invented sectors of eight invented assets trade on business days from 2031 on. Daily
returns follow a factor model whose loadings switch between five regimes, each known:

1. ``calm``: strong sector factors, a weak common factor;
2. ``build_up``: the common factor takes over step by step, sectors fade (clusters melt);
3. ``stress``: the common factor dominates, volatility triples, prices fall (a drawdown);
4. ``recovery``: sector structure returns, prices drift up;
5. ``rewired``: assets are reassigned to new sectors, and the eight ``Vorrel`` assets co-move
   in a ring (each shares one factor with each neighbour), which gives a loop (H1).

A few gaps, a late listing and a delisting exercise the coverage policy. Everything is
deterministic for a seed. The names, sectors and dates are invented.

Asset codes are a two-letter prefix and two digits (``QY01``, ``QV08``): the digits keep a code
from being read as a listed symbol, and the prefixes start with ``Q`` (the demo) or ``X`` (the
tests' invented data), which no exchange we know of uses as a symbol root. One pattern,
:data:`ASSET_CODE`, says what an invented code looks like; :func:`asset_codes` makes them.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from riskshape.errors import ConfigError
from riskshape.types import IntArray, Positions, PriceFrame, ReturnsBlock

__all__ = ["Scenario", "generate_scenario", "asset_codes", "SECTORS", "SECTOR_PREFIXES", "REGIME_DAYS", "ASSET_CODE"]

__all__ = ["Scenario", "generate_scenario", "asset_codes", "SECTORS", "SECTOR_PREFIXES", "REGIME_DAYS", "ASSET_CODE"]

# Sector words coined for riskshape. From memory, none is a brand name in finance nor the name of
# a listed company (no registry was consulted). Their code prefixes (Q + a letter) sort in the
# same order as the sector list did before, so the asset columns keep their order, sorted or not.
SECTORS: tuple[str, ...] = ("Yarrock", "Jorrin", "Kelvane", "Vorrel", "Wystle", "Zumbril")
SECTOR_PREFIXES: dict[str, str] = {
    "Yarrock": "QY",
    "Jorrin": "QJ",
    "Kelvane": "QK",
    "Vorrel": "QV",
    "Wystle": "QW",
    "Zumbril": "QZ",
}
# An invented asset code: Q or X, one more capital letter, then two digits.
ASSET_CODE: re.Pattern[str] = re.compile(r"[QX][A-Z][0-9]{2}")
REGIME_DAYS: tuple[tuple[str, int], ...] = (
    ("calm", 500),
    ("build_up", 120),
    ("stress", 60),
    ("recovery", 250),
    ("rewired", 370),
)
# (common-factor loading at start, at end, sector loading at start, at end, daily vol, daily drift)
_LOADINGS: dict[str, tuple[float, float, float, float, float, float]] = {
    "calm": (0.35, 0.35, 0.70, 0.70, 0.010, 0.0003),
    "build_up": (0.35, 0.80, 0.70, 0.35, 0.011, 0.0000),
    "stress": (0.88, 0.88, 0.25, 0.25, 0.028, -0.0045),
    "recovery": (0.40, 0.40, 0.65, 0.65, 0.012, 0.0010),
    "rewired": (0.35, 0.35, 0.70, 0.70, 0.010, 0.0003),
}
_RING_SECTOR = "Vorrel"
_START = "2031-01-02"


@dataclass(frozen=True)
class Scenario:
    """A generated market and its ground truth.

    Attributes
    ----------
    prices : pandas.DataFrame
        Wide prices (business days x assets), NaN where an asset did not trade.
    sectors : dict of str to str
        Sector of each asset before the rewiring.
    sectors_after : dict of str to str
        Sector of each asset in the ``rewired`` regime.
    regimes : pandas.DataFrame
        One row per regime: ``name``, ``start``, ``end`` (first and last return dates).
    ring : tuple of str
        The ring's assets, in ring order (they co-move with their neighbours in ``rewired``).
    seed : int
    """

    prices: PriceFrame
    sectors: dict[str, str]
    sectors_after: dict[str, str]
    regimes: pd.DataFrame
    ring: tuple[str, ...]
    seed: int

    @property
    def stress(self) -> tuple[pd.Timestamp, pd.Timestamp]:
        """First and last day of the stress episode."""
        row = self.regimes.set_index("name").loc["stress"]
        return pd.Timestamp(row["start"]), pd.Timestamp(row["end"])

    @property
    def changes(self) -> pd.Series:
        """Date each regime after the first begins, indexed by regime name."""
        return self.regimes.set_index("name")["start"].iloc[1:]


def generate_scenario(seed: int = 7, n_days: int | None = None, assets_per_sector: int = 8) -> Scenario:
    """Generate the fictional market.

    Parameters
    ----------
    seed : int
        Seed of the ``numpy.random.default_rng`` that draws every shock.
    n_days : int, optional
        Keep only the first ``n_days`` return days (all 1300 by default).
    assets_per_sector : int
        Assets in each of the six sectors (at least 4).

    Returns
    -------
    Scenario

    Examples
    --------
    >>> s = generate_scenario(seed=1)
    >>> s.prices.shape
    (1301, 48)
    >>> list(s.regimes["name"])
    ['calm', 'build_up', 'stress', 'recovery', 'rewired']
    """
    rng = np.random.default_rng(seed)
    n_sectors = len(SECTORS)
    assets = [code for sector in SECTORS for code in asset_codes(SECTOR_PREFIXES[sector], assets_per_sector)]
    sector_of = np.repeat(np.arange(n_sectors), assets_per_sector)
    rewired_of = _rewire(sector_of, rng)
    ring_members = np.flatnonzero(sector_of == SECTORS.index(_RING_SECTOR))

    blocks = []
    regimes = []
    day = 0
    for name, length in REGIME_DAYS:
        blocks.append(_regime_returns(name, length, sector_of, rewired_of, ring_members, rng))
        regimes.append((name, day + 1, day + length))  # +1: row 0 of the prices has no return
        day += length
    returns = np.vstack(blocks)
    dates = pd.bdate_range(_START, periods=len(returns) + 1, name="date")
    prices = 100.0 * np.exp(np.vstack([np.zeros(len(assets)), np.cumsum(returns, axis=0)]))
    frame = pd.DataFrame(prices, index=dates, columns=pd.Index(assets, name="asset"))
    _punch_gaps(frame, rng)

    table = pd.DataFrame(
        [(name, dates[first], dates[last]) for name, first, last in regimes], columns=["name", "start", "end"]
    )
    if n_days is not None:
        frame = frame.iloc[: n_days + 1]
        table = table[table["start"] <= frame.index[-1]].copy()
        table.loc[table.index[-1], "end"] = min(table["end"].iloc[-1], frame.index[-1])
    ring = tuple(assets[j] for j in ring_members)
    return Scenario(
        prices=frame,
        sectors={a: SECTORS[s] for a, s in zip(assets, sector_of)},
        sectors_after={a: SECTORS[s] for a, s in zip(assets, rewired_of)},
        regimes=table.reset_index(drop=True),
        ring=ring,
        seed=seed,
    )


def asset_codes(prefix: str, n: int) -> tuple[str, ...]:
    """Invented asset codes ``<prefix>01`` to ``<prefix><n>``, each checked against :data:`ASSET_CODE`.

    Parameters
    ----------
    prefix : str
        Two capital letters, the first ``Q`` (the demo) or ``X`` (the tests' invented data).
    n : int
        How many codes (1 to 99).

    Returns
    -------
    tuple of str

    Raises
    ------
    riskshape.errors.ConfigError
        If a code would not match :data:`ASSET_CODE` (a bad prefix, or ``n`` outside 1..99).

    Examples
    --------
    >>> asset_codes("XQ", 3)
    ('XQ01', 'XQ02', 'XQ03')
    """
    if not 1 <= n <= 99:
        raise ConfigError(f"asset_codes: n must be 1 to 99 (two digits), got {n!r}")
    codes = tuple(f"{prefix}{k:02d}" for k in range(1, n + 1))
    if not ASSET_CODE.fullmatch(codes[0]):
        raise ConfigError(f"asset_codes: prefix must be Q or X then a capital letter (e.g. 'XQ'), got {prefix!r}")
    return codes


def _rewire(sector_of: IntArray, rng: np.random.Generator) -> IntArray:
    """New sector ties: half of each sector (the ring's sector excepted) moves to another sector."""
    new = sector_of.copy()
    ring_sector = SECTORS.index(_RING_SECTOR)
    movers = [j for j in range(len(new)) if new[j] != ring_sector and rng.random() < 0.5]
    others = [s for s in range(len(SECTORS)) if s != ring_sector]
    for j in movers:
        new[j] = rng.choice([s for s in others if s != sector_of[j]])
    return new


def _regime_returns(
    name: str,
    length: int,
    sector_of: IntArray,
    rewired_of: IntArray,
    ring_members: Positions,
    rng: np.random.Generator,
) -> ReturnsBlock:
    m0, m1, s0, s1, vol, drift = _LOADINGS[name]
    n = len(sector_of)
    ramp = np.linspace(0.0, 1.0, length)[:, None]
    common = m0 + (m1 - m0) * ramp
    sector_load = s0 + (s1 - s0) * ramp
    idio = np.sqrt(np.clip(1.0 - common**2 - sector_load**2, 0.05, None))
    market = rng.standard_normal((length, 1))
    sectors = rng.standard_normal((length, len(SECTORS)))
    groups = rewired_of if name == "rewired" else sector_of
    shocks = common * market + sector_load * sectors[:, groups] + idio * rng.standard_normal((length, n))
    if name == "rewired":
        # each ring member shares one factor with each neighbour: neighbours correlate, others do not
        ring = rng.standard_normal((length, len(ring_members)))
        for k, j in enumerate(ring_members):
            shocks[:, j] = (
                0.2 * market[:, 0]
                + 0.68 * (ring[:, k] + ring[:, (k + 1) % len(ring_members)]) / np.sqrt(2)
                + 0.35 * rng.standard_normal(length)
            )
    return drift + vol * shocks


def _punch_gaps(frame: pd.DataFrame, rng: np.random.Generator) -> None:
    """A late listing, a delisting and scattered missing days (in place)."""
    n_rows = len(frame)
    frame.iloc[: min(180, n_rows), frame.columns.get_loc(frame.columns[-1])] = np.nan  # lists late
    frame.iloc[min(1150, n_rows) :, frame.columns.get_loc(frame.columns[-2])] = np.nan  # delists
    holes = rng.integers(0, n_rows, size=(40,))
    cols = rng.integers(0, frame.shape[1] - 2, size=(40,))
    for i, j in zip(holes, cols):
        frame.iat[int(i), int(j)] = np.nan
