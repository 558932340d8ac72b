"""The Store's behaviour, identical on SQLite and PostgreSQL (each test runs on both)."""

from __future__ import annotations

import dataclasses
import hashlib
import json
import sqlite3
from datetime import timezone

import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext

from riskshape.errors import ConflictError, DataError, NotFoundError, StoreError
from riskshape.store import GENESIS_HASH, Store, chain_head, open_store, verify_chain
from riskshape.store.schema import APPEND_ONLY_TABLES, metadata
from tests.kit.archive import make_alerts, manifest, walk_prices


def test_schema_from_migrations_matches_the_models(store: Store) -> None:
    # Alembic's own comparison of a live database against SQLAlchemy metadata: no difference may remain.
    with store.engine.connect() as connection:
        context = MigrationContext.configure(connection, opts={"compare_type": True})
        assert compare_metadata(context, metadata) == []
    assert store.revision == "0005"


def test_the_shipped_head_is_alembics_head() -> None:
    # the start-up path reads the head from the file names (no Alembic import); Alembic's own view must agree
    from alembic.script import ScriptDirectory

    from riskshape.store.database import MIGRATIONS, _alembic_config, head_revision

    script = ScriptDirectory.from_config(_alembic_config())
    assert head_revision() == script.get_current_head()
    for revision in script.walk_revisions():
        assert list((MIGRATIONS / "versions").glob(f"{revision.revision}_*.py")), revision.revision


def test_reopening_runs_no_migration_and_keeps_data(store_url: str) -> None:
    with open_store(store_url) as first:
        first.create_portfolio("Fund East")
    with open_store(store_url) as second:
        assert [p.name for p in second.list_portfolios()] == ["Fund East"]
        assert second.revision == first.revision


def test_sqlite_connection_settings(tmp_path) -> None:
    store = open_store(f"sqlite:///{tmp_path / 'settings.sqlite'}")
    with store, store.engine.connect() as connection:
        pragma = lambda name: connection.exec_driver_sql(f"PRAGMA {name}").scalar()  # noqa: E731
        # SQLite documentation: journal_mode reports 'wal'; synchronous FULL is 2; foreign_keys 1.
        assert pragma("journal_mode") == "wal"
        assert pragma("synchronous") == 2
        assert pragma("foreign_keys") == 1
        assert pragma("busy_timeout") >= 1000


def test_portfolios(store: Store) -> None:
    created = store.create_portfolio("Fund West")
    assert created.created_at.tzinfo is not None
    assert store.get_portfolio("Fund West") == created
    assert store.ensure_portfolio("Fund West") == created
    with pytest.raises(ConflictError, match="already exists"):
        store.create_portfolio("Fund West")
    with pytest.raises(NotFoundError, match="Fund Nowhere"):
        store.get_portfolio("Fund Nowhere")
    with pytest.raises(StoreError, match="control character"):
        store.create_portfolio("bad\nname")
    assert [p.name for p in store.list_portfolios()] == ["Fund West"]


def test_prices_round_trip_exactly(store: Store, rng: np.random.Generator) -> None:
    store.create_portfolio("Fund West")
    prices = walk_prices(rng)
    prices.iloc[3, 2] = np.nan
    written = store.append_prices("Fund West", prices)
    assert (written.added, written.corrections, written.unchanged) == (prices.size, 0, 0)
    back = store.read_prices("Fund West", assets=list(prices.columns))
    pd.testing.assert_frame_equal(back, prices, check_freq=False, check_names=False)
    again = store.append_prices("Fund West", prices)
    assert (again.added, again.corrections, again.unchanged) == (0, 0, prices.size)


def test_corrections_are_new_revisions_and_visible(store: Store, rng: np.random.Generator) -> None:
    store.create_portfolio("Fund West")
    prices = walk_prices(rng)
    first = store.create_run("Fund West", manifest(), prices)
    revised = prices.copy()
    revised.iloc[5, 0] = prices.iloc[5, 0] * 1.01
    revised.iloc[7, 1] = np.nan
    second = store.create_run("Fund West", manifest(), revised)
    assert (second.prices_added, second.corrections_added) == (0, 2)
    corrections = store.list_corrections("Fund West")
    assert [(c.asset, c.revision) for c in corrections] == [("XQ01", 1), ("XQ02", 1)]
    assert corrections[0].old_price == prices.iloc[5, 0] and corrections[0].new_price == revised.iloc[5, 0]
    assert corrections[1].old_price == prices.iloc[7, 1] and np.isnan(corrections[1].new_price)
    columns = list(prices.columns)
    pd.testing.assert_frame_equal(
        store.read_prices("Fund West", assets=columns), revised, check_freq=False, check_names=False
    )
    # as of the first run the correction was not there yet
    pd.testing.assert_frame_equal(
        store.read_prices("Fund West", assets=columns, as_of_run=first.id), prices, check_freq=False, check_names=False
    )
    with store.engine.connect() as connection:
        n_rows = connection.execute(sa.text("SELECT count(*) FROM prices")).scalar_one()
    assert n_rows == prices.size + 2  # nothing overwritten


def test_bad_prices_are_refused_with_the_cell_named(store: Store, rng: np.random.Generator) -> None:
    store.create_portfolio("Fund West")
    prices = walk_prices(rng)
    prices.iloc[2, 1] = -1.0
    with pytest.raises(DataError, match="XQ02"):
        store.append_prices("Fund West", prices)


def test_run_manifest(store: Store, rng: np.random.Generator) -> None:
    store.create_portfolio("Fund West")
    prices = walk_prices(rng, n_days=12)
    run = store.create_run("Fund West", manifest(config_hash="a" * 64), prices)
    assert run == store.get_run(run.id)
    assert run.config == {"monitor": {"window": 20}} and run.config_hash == "a" * 64
    assert (run.first_date, run.last_date, run.n_dates) == (prices.index[0].date(), prices.index[-1].date(), 12)
    assert run.assets == tuple(prices.columns)
    assert store.list_runs("Fund West") == (run,)
    assert store.latest_run("Fund West") == run
    later = store.create_run("Fund West", manifest(config_hash="b" * 64), prices)
    assert store.latest_run("Fund West") == later and store.list_runs("Fund West") == (run, later)
    store.create_portfolio("Fund Empty")
    assert store.latest_run("Fund Empty") is None
    with pytest.raises(StoreError, match="config_hash"):
        store.create_run("Fund West", manifest(config_hash="not-a-hash"), prices)
    with pytest.raises(NotFoundError):
        store.get_run(run.id + 100)


def test_features_idempotent_paged_and_typed(store: Store, run, rng: np.random.Generator) -> None:
    ends = pd.DatetimeIndex(pd.bdate_range("2030-02-01", periods=25), name="window_end")
    features = pd.DataFrame(
        {
            "n_assets": rng.integers(3, 9, 25),
            "mean_correlation": rng.uniform(-1, 1, 25),
            "h1_wasserstein": rng.uniform(0, 1, 25),
        },
        index=ends,
    )
    features.iloc[0, 2] = np.nan
    assert dataclasses.astuple(store.write_features(run.id, features)) == (25, 0, 0)
    assert dataclasses.astuple(store.write_features(run.id, features)) == (0, 25, 0)
    changed = features.copy()
    changed.iloc[-1, 1] += 0.5
    assert dataclasses.astuple(store.write_features(run.id, changed)) == (0, 24, 1)  # kept as archived
    assert store.window_ends("Fund North") == tuple(e.date() for e in ends)
    assert store.window_ends("Fund North", config_hash="e" * 64) == ()
    whole = store.read_features("Fund North").frame
    pd.testing.assert_frame_equal(whole, features, check_freq=False)
    assert whole["n_assets"].dtype == np.int64
    page = store.read_features("Fund North", start=ends[5], end=ends[20], columns=["h1_wasserstein"], limit=4, offset=8)
    assert page.total == 16 and page.offset == 8
    pd.testing.assert_frame_equal(page.frame, features[["h1_wasserstein"]].iloc[13:17], check_freq=False)
    with pytest.raises(StoreError, match="h9_nothing"):
        store.read_features("Fund North", columns=["h9_nothing"])


def test_diagrams_round_trip_as_float32(store: Store, run, rng: np.random.Generator) -> None:
    births = rng.uniform(0, 1, 7)
    bars = np.column_stack([births, births + rng.uniform(0, 1, 7)])
    end = pd.Timestamp("2030-02-04")
    assert store.write_diagrams(run.id, [(end, 1, bars), (end, 0, np.empty((0, 2)))]).added == 2
    assert store.write_diagrams(run.id, [(end, 1, bars)]).existing == 1
    diagram = store.read_diagram("Fund North", end, 1)
    # numpy's own float32 cast is the reference for what float32 storage keeps
    np.testing.assert_array_equal(diagram.bars, bars.astype(np.float32))
    assert store.read_diagram("Fund North", end, 0).bars.shape == (0, 2)
    with pytest.raises(NotFoundError, match="dim 2"):
        store.read_diagram("Fund North", end, 2)


def test_alerts_append_idempotent_and_chained(store: Store, run, rng: np.random.Generator) -> None:
    batch = make_alerts(rng, 6)
    before = chain_head(store)  # the commitments of the portfolio and its run
    assert before.count == 2 and before.head_hash != GENESIS_HASH
    first = store.append_alerts(batch, run.id)
    assert len(first.added) == 6 and first.existing == 0
    assert first.added[0].prev_hash == before.head_hash
    assert [a.seq for a in first.added] == [3, 4, 5, 6, 7, 8]
    assert all(b.prev_hash == a.entry_hash for a, b in zip(first.added, first.added[1:]))
    again = store.append_alerts(batch, run.id)
    assert again.added == () and again.existing == 6
    more = store.append_alerts(batch + make_alerts(rng, 2, start="2031-01-01"), run.id)
    assert len(more.added) == 2 and more.existing == 6
    assert store.list_alerts(limit=None).total == 8
    stored = store.get_alert(first.added[0].id).alert
    assert stored == first.added[0]
    assert stored.to_alert().firing.value == batch[0].firing.value
    assert verify_chain(store).ok


def test_alert_hash_is_sha256_of_the_documented_serialisation(store: Store, run, rng: np.random.Generator) -> None:
    # Rebuild the canonical bytes independently (documented in riskshape.store.canonical) and hash with hashlib.
    alert = store.append_alerts(make_alerts(rng, 1), run.id).added[0]
    fields = dataclasses.asdict(alert)
    fields.pop("entry_hash")
    payload = {k: (repr(v) if isinstance(v, float) else v) for k, v in fields.items()}
    payload["window_end"] = alert.window_end.isoformat()
    payload["raised_at"] = alert.raised_at.astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
    payload["table"] = "alerts"
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"))
    assert hashlib.sha256(text.encode()).hexdigest() == alert.entry_hash


def test_alerts_refuse_bad_values(store: Store, run, rng: np.random.Generator) -> None:
    bad = make_alerts(rng, 1)[0]
    nan_value = dataclasses.replace(bad, firing=dataclasses.replace(bad.firing, value=float("nan")))
    with pytest.raises(StoreError, match="value must be a finite number"):
        store.append_alerts([nan_value], run.id)
    other = dataclasses.replace(bad, portfolio="Fund South")
    with pytest.raises(StoreError, match="belongs to portfolio 'Fund North'"):
        store.append_alerts([other], run.id)
    with pytest.raises(NotFoundError, match="run 999"):
        store.append_alerts([bad], 999)


def test_list_alerts_filters_and_paging(store: Store, run, rng: np.random.Generator) -> None:
    a = make_alerts(rng, 5, rule="rule_a", start="2030-03-01")
    b = [
        dataclasses.replace(x, firing=dataclasses.replace(x.firing, severity="critical"))
        for x in make_alerts(rng, 3, rule="rule_b", start="2030-03-04")
    ]
    added = store.append_alerts(a + b, run.id).added
    assert store.list_alerts(rule="rule_b").total == 3
    assert store.list_alerts(severity="critical").total == 3
    assert store.list_alerts(severity=["critical", "warning"]).total == 8
    window = store.list_alerts(since="2030-03-04", until="2030-03-05")
    assert {x.window_end.isoformat() for x in window.items} == {"2030-03-04", "2030-03-05"}
    assert window.total == 4
    page = store.list_alerts(limit=3, offset=3)
    assert page.total == 8 and [x.id for x in page.items] == [x.id for x in store.list_alerts(limit=None).items[3:6]]
    store.append_review(added[0].id, "acknowledge", "Reviewer One", "seen")
    assert [x.id for x in store.list_alerts(reviewed=True).items] == [added[0].id]
    assert store.list_alerts(reviewed=False).total == 7
    with pytest.raises(StoreError, match="YYYY-MM-DD"):
        store.list_alerts(since="yesterday-ish")


def test_reviews_join_the_chain(store: Store, run, rng: np.random.Generator) -> None:
    alerts = store.append_alerts(make_alerts(rng, 2), run.id).added
    review = store.append_review(alerts[0].id, "escalate", "Reviewer Two", "needs a look")
    assert review.seq == 2 + 3 and review.prev_hash == alerts[1].entry_hash
    store.append_alerts(make_alerts(rng, 1, start="2031-05-01"), run.id)
    dismissal = store.append_review(alerts[0].id, "dismiss", "Reviewer Three")
    detail = store.get_alert(alerts[0].id)
    assert [r.action for r in detail.reviews] == ["escalate", "dismiss"]
    assert detail.reviews[1] == dismissal and dismissal.seq == 2 + 5
    with pytest.raises(StoreError, match="acknowledge, dismiss, escalate"):
        store.append_review(alerts[0].id, "approve", "Reviewer Two")
    with pytest.raises(NotFoundError, match="alert 99"):
        store.append_review(99, "dismiss", "Reviewer Two")
    report = verify_chain(store)
    assert report.ok and report.head.count == 2 + 5 and report.head.head_hash == dismissal.entry_hash


@pytest.mark.parametrize("table", APPEND_ONLY_TABLES)
def test_history_tables_refuse_update_and_delete(store: Store, run, rng: np.random.Generator, table: str) -> None:
    alert = store.append_alerts(make_alerts(rng, 1), run.id).added[0]
    store.append_review(alert.id, "acknowledge", "Reviewer One")
    store.append_event("day_closed", {"date": "2030-01-02"})
    column = {"ledger": "kind", "alerts": "rule", "reviews": "comment", "events": "actor", "prices": "asset"}.get(
        table, "source"
    )
    for statement in (f"UPDATE {table} SET {column} = 'x'", f"DELETE FROM {table}"):
        with (
            store.engine.connect() as connection,
            pytest.raises(sa.exc.DatabaseError, match="append-only"),
            connection.begin(),
        ):
            connection.exec_driver_sql(statement)
    assert verify_chain(store).ok


def test_a_fork_is_refused_by_unique_constraints(store: Store, run, rng: np.random.Generator) -> None:
    first = store.append_alerts(make_alerts(rng, 1), run.id).added[0]
    with (
        store.engine.connect() as connection,
        pytest.raises(sa.exc.IntegrityError),
        connection.begin(),  # a second record claiming the genesis as its predecessor
    ):
        connection.execute(
            sa.text("INSERT INTO ledger (seq, kind, prev_hash, entry_hash) VALUES (2, 'alert', :prev, :own)"),
            {"prev": first.prev_hash, "own": "f" * 64},
        )


def test_api_keys(store: Store) -> None:
    new = store.create_api_key("Analyst Ada", "reviewer")
    assert new.key.key_id in new.token and store.lookup_api_key(new.token) == new.key
    assert store.lookup_api_key(new.token + "x") is None
    assert store.lookup_api_key("no-dot-token") is None
    with store.engine.connect() as connection:
        stored = connection.execute(sa.text("SELECT key_hash FROM api_keys")).scalar_one()
    secret = new.token.split(".", 1)[1]
    assert stored == hashlib.sha256(secret.encode()).hexdigest() and secret not in stored
    revoked = store.revoke_api_key(new.key.key_id)
    assert revoked.revoked and store.lookup_api_key(new.token).revoked
    assert store.list_api_keys() == (revoked,)
    with pytest.raises(StoreError, match="role"):
        store.create_api_key("Analyst Ada", "Root!")
    with pytest.raises(NotFoundError):
        store.revoke_api_key("0000")


def test_bad_urls_are_store_errors(tmp_path) -> None:
    with pytest.raises(StoreError, match="does not exist"):
        open_store(f"sqlite:///{tmp_path / 'missing' / 'a.sqlite'}")
    with pytest.raises(StoreError, match="not a supported database"):
        open_store("mysql://localhost/db")
    with pytest.raises(StoreError, match="psycopg"):
        open_store("postgresql+psycopg2://postgres@127.0.0.1/test")
    with pytest.raises(StoreError, match="cannot be read"):
        open_store("not a url")
    with pytest.raises(StoreError, match="'foo' is not a supported database"):  # no SQLAlchemy dialect at all
        open_store("foo://bar")


def test_open_without_create_refuses_a_missing_archive(store_url: str) -> None:
    with pytest.raises(StoreError, match="no archive at"):
        open_store(store_url, create=False)
    open_store(store_url).close()
    with open_store(store_url, create=False) as existing:
        assert existing.list_portfolios() == ()


def test_a_write_transaction_holds_the_lock_before_reading(store: Store) -> None:
    # While a write transaction is open (and has read nothing yet), no other writer may start.
    from riskshape.store.database import LOCK_KEY, write_transaction

    with write_transaction(store.engine), store.engine.connect() as other:
        if store.dialect == "sqlite":
            raw = other.connection.driver_connection
            raw.execute("PRAGMA busy_timeout = 0")
            with pytest.raises(sqlite3.OperationalError, match="locked"):
                raw.execute("BEGIN IMMEDIATE")
            raw.execute("PRAGMA busy_timeout = 30000")
        else:
            got = other.execute(
                sa.text("SELECT pg_try_advisory_xact_lock(:k, hashtext(current_schema()))"), {"k": LOCK_KEY}
            ).scalar_one()
            other.rollback()
            assert got is False
    with store.engine.connect() as other:  # released at the end of the transaction
        if store.dialect == "sqlite":
            raw = other.connection.driver_connection
            raw.execute("BEGIN IMMEDIATE")
            raw.execute("ROLLBACK")
        else:
            assert (
                other.execute(
                    sa.text("SELECT pg_try_advisory_xact_lock(:k, hashtext(current_schema()))"), {"k": LOCK_KEY}
                ).scalar_one()
                is True
            )
            other.rollback()


def test_an_unreachable_database_is_one_line_store_error() -> None:
    with pytest.raises(StoreError, match="cannot open the archive") as caught:
        open_store("postgresql+psycopg://postgres@127.0.0.1:1/test?connect_timeout=2")
    assert "\n" not in str(caught.value)
