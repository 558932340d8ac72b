"""What verify checks beyond the chain: the commitments over runs, prices, features, diagrams and
portfolios, and the API keys against their chained events; each problem named by table and key.
"""

from __future__ import annotations

import json

import pandas as pd
import pytest
import sqlalchemy as sa

from riskshape import monitor
from riskshape.archive import archive_run
from riskshape.compute.monitor import MonitorResult
from riskshape.store import Store, verify_chain
from riskshape.store.merkle import merkle_root
from riskshape.store.seals import fetch_rows, row_leaf
from tests.kit.archive import around_triggers


@pytest.fixture
def archived(store: Store, computed: MonitorResult) -> Store:
    archive_run(store, "Fund North", computed)
    assert verify_chain(store).ok
    return store


def _first_price_row(store: Store) -> tuple[int, str, str]:
    with store.engine.connect() as connection:
        row = connection.execute(sa.text("SELECT id, asset, date FROM prices ORDER BY id LIMIT 1 OFFSET 40")).one()
    return int(row.id), str(row.asset), str(row.date)


def test_an_edited_price_is_named_with_its_cell_and_run(archived: Store) -> None:
    price_id, asset, day = _first_price_row(archived)
    with around_triggers(archived) as connection:
        connection.execute(sa.text("UPDATE prices SET price = price * 1.01 WHERE id = :i"), {"i": price_id})
    bad = verify_chain(archived).first_bad
    assert bad is not None and (bad.table, bad.record_id) == ("prices", price_id)
    assert f"'Fund North', {asset}, {day}" in bad.reason and "run 1's commitment" in bad.reason
    assert str(bad).startswith(f"seq {bad.seq} (prices id {price_id}): portfolio 'Fund North'")


def test_the_commitment_root_is_the_rfc6962_root_of_the_rows_bytes(archived: Store) -> None:
    # merkle_root is checked against RFC 9162's definition in test_merkle.py; here: the root covers these rows
    (sealed,) = archived.list_events(kind="records_sealed")
    part = sealed.data["tables"]["features"]
    with archived.engine.connect() as connection:
        rows = fetch_rows(connection, "features", 1, 0, None)
    assert part["count"] == len(rows) and part["root"] == merkle_root([row_leaf("features", r) for r in rows])


@pytest.mark.parametrize(
    ("statement", "table"),
    [
        ("UPDATE runs SET input_hash = '{}' WHERE id = 1".format("0" * 64), "runs"),
        ("UPDATE runs SET config_json = replace(config_json, '20', '21') WHERE id = 1", "runs"),
        ("UPDATE features SET values_json = replace(values_json, '1', '2') WHERE id = 3", "features"),
        ("DELETE FROM diagrams WHERE id = 5", "diagrams"),
        ("UPDATE portfolios SET name = 'Fund South' WHERE id = 1", "portfolios"),
        ("INSERT INTO portfolios (id, name, created_at) VALUES (9, 'Fund West', '2030-01-01 00:00:00')", "portfolios"),
    ],
)
def test_runs_summaries_diagrams_and_portfolios_are_covered(archived: Store, statement: str, table: str) -> None:
    with around_triggers(archived) as connection:
        connection.execute(sa.text(statement))
    report = verify_chain(archived)
    assert not report.ok and report.first_bad is not None and report.first_bad.table == table, report.first_bad


def test_a_raised_role_or_an_unrevoked_key_is_caught(store: Store) -> None:
    made = store.create_api_key("Ana Owner", "reader")
    other = store.create_api_key("Bo Owner", "reviewer")
    store.revoke_api_key(other.key.key_id)
    store.revoke_api_key(other.key.key_id)  # a second revocation adds nothing
    created = store.list_events(kind="key_created")
    assert [e.subject for e in created] == [made.key.key_id, other.key.key_id]
    assert len(store.list_events(kind="key_revoked")) == 1
    secret = made.token.split(".", 1)[1]
    assert all(secret not in e.payload for e in store.list_events())  # the digest is archived, never the token
    assert json.loads(created[0].payload)["role"] == "reader"
    assert verify_chain(store).ok
    with around_triggers(store) as connection:
        connection.execute(sa.text("UPDATE api_keys SET role = 'admin' WHERE key_id = :k"), {"k": made.key.key_id})
    bad = verify_chain(store).first_bad
    assert bad is not None and bad.table == "api_keys" and made.key.key_id in bad.reason and "'admin'" in bad.reason
    with around_triggers(store) as connection:
        connection.execute(sa.text("UPDATE api_keys SET role = 'reader' WHERE key_id = :k"), {"k": made.key.key_id})
        connection.execute(
            sa.text("UPDATE api_keys SET revoked = :f WHERE key_id = :k"), {"f": False, "k": other.key.key_id}
        )
    bad = verify_chain(store).first_bad
    assert bad is not None and other.key.key_id in bad.reason and "not revoked" in bad.reason


def test_a_plain_price_append_and_a_correction_are_covered(
    archived: Store, computed: MonitorResult, small_prices: pd.DataFrame
) -> None:
    revised = small_prices.copy()
    revised.iloc[60, 2] *= 1.02
    archive_run(archived, "Fund North", monitor(revised, computed.config))  # a correction
    more = small_prices.iloc[-1:].copy()
    more.index = more.index + pd.offsets.BDay(5)
    archived.append_prices("Fund North", more)  # prices outside any run: their own commitment
    commitments = archived.list_events(kind="records_sealed")
    assert len(commitments) == 3 and commitments[-1].data["runs"] == []
    assert verify_chain(archived).ok
    with around_triggers(archived) as connection:
        newest = connection.execute(sa.text("SELECT max(id) FROM prices")).scalar_one()
        connection.execute(sa.text("UPDATE prices SET price = 1.0 WHERE id = :i"), {"i": newest})
    bad = verify_chain(archived).first_bad
    assert bad is not None and (bad.table, bad.record_id) == ("prices", newest)
