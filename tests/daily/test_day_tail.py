"""The day tail: one compact row per portfolio with what its next day reads (riskshape.store.tails).

References: the archive itself read cell by cell and row by row (``Store.read_prices`` and
``Store.last_features``, which the full-run tests in ``test_tail_run.py`` tie to ``monitor``) is
what the kept row must equal, bit for bit; the digest is SHA-256 as ``hashlib`` computes it
(FIPS 180-4). A row changed behind riskshape's back must neither be used nor pass ``audit verify``.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa

from riskshape import Config
from riskshape.config import RuleConfig
from riskshape.daily import Ingestor
from riskshape.daily.tail_run import kept_tail, read_day_state
from riskshape.errors import StoreError
from riskshape.prices import ValidPrices, validate_prices
from riskshape.store import Store, open_store, verify_chain
from riskshape.store import schema as t
from riskshape.store.tails import DayTail, decode_tail, encode_tail, tail_digest
from tests.kit.archive import walk_prices
from tests.kit.assets import codes
from tests.kit.postgres import fresh_schema_url

ASSETS = codes(6)
RULES = [
    RuleConfig(name="corr-up", summary="mean_correlation", kind="quantile", threshold=0.6, lookback=30, min_history=5),
    RuleConfig(name="h0-z", summary="h0_total_persistence", kind="zscore", threshold=0.3, lookback=25, min_history=4),
]
CONFIG = Config(window=20, step=1, maxdim=1, compute={"executor": "serial"}, alerts={"rules": RULES})
WATCHED = sorted({r.summary for r in RULES})


def _valid(frame: pd.DataFrame) -> ValidPrices:
    return validate_prices(frame.reset_index(), source="test body", min_rows=1, min_assets=1)


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def urls(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[tuple[str, str]]:
    """Two archives of the same kind: one to tamper with, and its twin."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'a.sqlite'}", f"sqlite:///{tmp_path / 'b.sqlite'}"
        return
    with fresh_schema_url("rs_tail_a") as a, fresh_schema_url("rs_tail_b") as b:
        yield a, b


def _start(url: str, prices: pd.DataFrame, held: int) -> None:
    """The history whole: the full path."""
    with open_store(url) as store:
        store.ensure_portfolio("alpha")
        Ingestor(CONFIG).ingest(store, "alpha", _valid(prices.iloc[:held]))


def _feed(url: str, prices: pd.DataFrame, first: int, through: int) -> None:
    """Days ``first`` to ``through - 1``, one at a time after a restart each (the bounded path)."""
    for day in range(first, through):
        with open_store(url) as store:
            report = Ingestor(CONFIG).ingest(store, "alpha", _valid(prices.iloc[[day]]))
        assert report.windows_added == 1, report.note


def _kept(store: Store) -> DayTail:
    run = store.latest_run("alpha")
    assert run is not None
    state = read_day_state(store, "alpha", run)
    assert state is not None and state.tail_digest is not None
    kept = kept_tail(store, "alpha", state)
    assert kept is not None
    return kept


def test_the_kept_tail_is_what_the_archive_reads_bit_for_bit(urls: tuple[str, str], rng: np.random.Generator) -> None:
    prices = walk_prices(rng, n_days=140, assets=ASSETS)
    prices.iloc[120, 2] = np.nan  # a missing price inside the tail
    _start(urls[0], prices, 130)
    _feed(urls[0], prices, 130, 134)
    with open_store(urls[0]) as store:
        kept = _kept(store)
        archived = store.read_prices("alpha", start=kept.prices.index[0], end=kept.prices.index[-1], assets=ASSETS)
        pd.testing.assert_frame_equal(kept.prices, archived, check_exact=True)
        assert kept.prices.index[-1] == prices.index[133]
        assert kept.first_row == int(prices.index.get_loc(kept.prices.index[0]))  # its absolute row
        last = store.last_features(
            "alpha", end=prices.index[133], count=len(kept.features), columns=WATCHED, config_hash=CONFIG.hash()
        )
        pd.testing.assert_frame_equal(kept.features, last, check_exact=True)
        assert len(kept.features) == max(r.lookback for r in RULES)
        assert kept.diagram_end == store.window_ends("alpha")[-1]
        for k in range(CONFIG.maxdim + 1):
            archived_bars = store.read_diagram("alpha", kept.diagram_end, k).bars
            assert kept.diagrams[k].dtype == archived_bars.dtype
            np.testing.assert_array_equal(kept.diagrams[k], archived_bars)
        assert verify_chain(store).ok


def test_encoding_is_deterministic_and_a_foreign_payload_is_refused(rng: np.random.Generator) -> None:
    prices = walk_prices(rng, n_days=12, assets=ASSETS)
    prices.columns = pd.Index([str(c) for c in prices.columns], name="asset")
    features = pd.DataFrame({"a": np.linspace(0.0, 1.0, 5), "b": [np.nan, 1.5, -0.0, 2.0, 3.0]})
    features.index = pd.DatetimeIndex(prices.index[-5:], name="window_end").as_unit("us")
    bars = (np.array([[0.0, 0.25], [0.125, 0.5]], dtype="<f4"), np.zeros((0, 2), dtype="<f4"))
    tail = DayTail(7, prices.astype(float), features, diagram_end=prices.index[-1].date(), diagrams=bars)
    payload = encode_tail(tail)
    assert payload == encode_tail(tail)
    back = decode_tail(payload)
    np.testing.assert_array_equal(back.prices.to_numpy(), prices.to_numpy())
    assert np.signbit(back.features["b"].to_numpy()[2])  # bits kept, -0.0 included
    assert back.diagram_end == prices.index[-1].date()
    assert [b.shape for b in back.diagrams] == [(2, 2), (0, 2)]
    np.testing.assert_array_equal(back.diagrams[0], bars[0])
    with pytest.raises(StoreError, match="day tail: not a readable tail"):
        decode_tail(payload[:-8])
    with pytest.raises(StoreError, match="day tail: not a readable tail"):
        decode_tail(b"\x05\x00\x00\x00\x00\x00\x00\x00hello")


def _edit(url: str, change: bool) -> None:
    """Change one kept price: in the bytes alone (``change=False``), or with a matching digest (True)."""
    with open_store(url) as store:
        kept = _kept(store)
        edited = kept.prices.copy()
        edited.iloc[-3, 1] *= 1.25
        payload = encode_tail(DayTail(kept.first_row, edited, kept.features))
        values = {"payload": payload, **({"digest": tail_digest(payload)} if change else {})}
        with store.engine.begin() as connection:
            connection.execute(sa.update(t.day_tails).values(**values))


@pytest.mark.parametrize("digest_too", [False, True], ids=["bytes", "bytes-and-digest"])
def test_an_edited_tail_fails_audit_verify_and_the_next_day_reads_the_archive(
    urls: tuple[str, str], rng: np.random.Generator, digest_too: bool
) -> None:
    prices = walk_prices(rng, n_days=140, assets=ASSETS)
    edited, twin = urls
    for url in urls:
        _start(url, prices, 130)
        _feed(url, prices, 130, 133)
    _edit(edited, digest_too)
    with open_store(edited) as store:
        report = verify_chain(store)
        assert not report.ok and report.first_bad is not None
        assert report.first_bad.table == "day_tails"
        run = store.latest_run("alpha")
        assert run is not None
        state = read_day_state(store, "alpha", run)
        assert state is not None and kept_tail(store, "alpha", state) is None  # not used
    for url in urls:
        _feed(url, prices, 133, 134)  # this day reads the archive (the edited row would change its window)
    with open_store(edited) as a, open_store(twin) as b:
        pd.testing.assert_frame_equal(a.read_features("alpha").frame, b.read_features("alpha").frame)
        assert verify_chain(a).ok  # the day replaced the row with a true one
