"""Chained events: appended on the ledger beside alerts and reviews, covered by ``audit verify``,
filtered on reading; and migration 0002 (which adds them) keeps an older archive whole.
"""

from __future__ import annotations

import numpy as np
import pytest
import sqlalchemy as sa
from alembic import command
from alembic.autogenerate import compare_metadata
from alembic.migration import MigrationContext

from riskshape.errors import NotFoundError, StoreError
from riskshape.store import Run, Store, catalog, open_store, pricebook, seal_archive, series, verify_chain
from riskshape.store.database import _alembic_config, create_archive_engine, write_transaction
from riskshape.store.events import event_payload
from riskshape.store.schema import metadata
from tests.kit.archive import around_triggers, make_alerts, manifest, walk_prices


def test_events_share_the_ledger_and_verify(store: Store, run: Run, rng: np.random.Generator) -> None:
    store.append_alerts(make_alerts(rng, 2, rule="r1", start="2030-01-01"), run.id)
    first = store.append_event(
        "day_closed", {"date": "2030-02-03", "share": 0.75}, portfolio="Fund North", subject="2030-02-03", actor="ana"
    )
    store.append_event("period_note", {"period": ["2030-01-01", "2030-03-31"], "count": 3})
    report = verify_chain(store)
    assert report.ok and report.checked == 2 + 4  # after the commitments of the portfolio and its run
    assert first.seq == 2 + 3 and first.portfolio_id is not None
    assert first.data == {"date": "2030-02-03", "share": 0.75}
    assert [e.kind for e in store.list_events()] == ["records_sealed", "records_sealed", "day_closed", "period_note"]
    assert [e.id for e in store.list_events(kind="day_closed", portfolio="Fund North")] == [first.id]
    assert store.list_events(kind="day_closed", subject="2030-01-01") == ()


def test_events_refuse_what_cannot_be_archived(store: Store, run: Run) -> None:
    before = store.list_events()
    with pytest.raises(StoreError, match="event kind 'Day Closed'"):
        store.append_event("Day Closed", {})
    with pytest.raises(StoreError, match=r"payload\.share: nan is not a finite number"):
        store.append_event("day_closed", {"share": float("nan")})
    with pytest.raises(NotFoundError, match="portfolio 'Nowhere'"):
        store.append_event("day_closed", {}, portfolio="Nowhere")
    assert store.list_events() == before and verify_chain(store).checked == len(before)  # nothing half-written


def test_payload_text_is_canonical() -> None:
    # sorted keys, no spaces, numpy scalars as plain numbers (the bytes hashed must not depend on dict order)
    assert event_payload({"z": np.float64(0.5), "a": np.int64(3)}) == '{"a":3,"z":0.5}'
    assert event_payload({"a": 3, "z": 0.5}) == event_payload({"z": 0.5, "a": 3})


def test_edited_event_is_named_by_verify(store: Store, run: Run) -> None:
    store.append_event("day_closed", {"date": "2030-02-03"}, portfolio="Fund North")
    event = store.append_event("day_closed", {"date": "2030-02-04"}, portfolio="Fund North")
    with around_triggers(store) as connection:
        connection.exec_driver_sql(
            'UPDATE events SET payload = \'{"date":"2030-02-05"}\' WHERE id = %s' % event.id  # noqa: UP031
        )
    report = verify_chain(store)
    assert not report.ok
    assert report.first_bad is not None
    assert (report.first_bad.table, report.first_bad.record_id) == ("events", event.id)


def test_events_are_append_only(store: Store, run: Run) -> None:
    store.append_event("day_closed", {"date": "2030-02-03"})
    with pytest.raises(sa.exc.DBAPIError), write_transaction(store.engine) as connection:
        connection.execute(sa.text("UPDATE events SET actor = 'someone'"))


def test_migration_from_0001_keeps_every_record(
    store_url: str, rng: np.random.Generator, monkeypatch: pytest.MonkeyPatch
) -> None:
    """An archive written at revision 0001 opens at 0002 with the same chain, and takes events; once
    sealed (it was written before commitments), everything it holds verifies.
    """
    engine = create_archive_engine(store_url)
    config = _alembic_config()
    with write_transaction(engine) as connection:
        config.attributes["connection"] = connection
        command.upgrade(config, "0001")
    engine.dispose()
    # write records with the 0001 tables only (the store's ledger code reads no events table for appends),
    # as a riskshape before commitments did: no records_sealed event (there is no events table yet)
    for module in (catalog, pricebook, series):
        monkeypatch.setattr(module, "mark_unsealed", lambda connection, portfolio_id: None)
    with _at_0001(store_url) as old:
        old.create_portfolio("Fund North")
        run = old.create_run("Fund North", manifest(), walk_prices(rng))
        old.append_alerts(make_alerts(rng, 3, rule="r1", start="2030-01-01"), run.id)
        alert_id = old.list_alerts().items[0].id
        old.append_review(alert_id, "escalate", "ana", "too close to the threshold")
        with old.engine.connect() as connection:
            before = connection.execute(sa.text("SELECT seq, entry_hash FROM ledger ORDER BY seq")).all()
    monkeypatch.undo()
    with open_store(store_url) as upgraded:
        with upgraded.engine.connect() as connection:
            assert connection.execute(sa.text("SELECT seq, entry_hash FROM ledger ORDER BY seq")).all() == before
        unsealed = verify_chain(upgraded)
        assert not unsealed.ok and unsealed.checked == 4 and "not covered" in unsealed.first_bad.reason
        assert seal_archive(upgraded) == 1 and seal_archive(upgraded) == 0
        assert verify_chain(upgraded).ok and verify_chain(upgraded).checked == 5
        with upgraded.engine.connect() as connection:  # the rebuilt tables are the models' tables (Alembic's diff)
            context = MigrationContext.configure(connection, opts={"compare_type": True})
            assert compare_metadata(context, metadata) == []
        upgraded.append_event("day_closed", {"date": "2030-02-03"}, portfolio="Fund North")
        assert verify_chain(upgraded).ok and verify_chain(upgraded).checked == 6
        # the rebuilt tables keep their append-only triggers and their foreign keys
        with pytest.raises(sa.exc.DBAPIError), write_transaction(upgraded.engine) as connection:
            connection.execute(sa.text("DELETE FROM reviews"))
        with pytest.raises(sa.exc.DBAPIError), write_transaction(upgraded.engine) as connection:
            connection.execute(sa.text("UPDATE ledger SET kind = 'event'"))
        with pytest.raises(sa.exc.IntegrityError), write_transaction(upgraded.engine) as connection:
            connection.execute(
                sa.text(
                    "INSERT INTO reviews (id, seq, prev_hash, entry_hash, alert_id, action, reviewer, comment, "
                    "created_at) VALUES (99, 999, 'x', 'y', 1, 'close', 'bo', '', CURRENT_TIMESTAMP)"
                )
            )


class _at_0001:  # noqa: N801 - used as a context manager like open_store
    """A Store over an archive left at revision 0001 (open_store would upgrade it)."""

    def __init__(self, url: str) -> None:
        self.store = Store(create_archive_engine(url), url, "0001")

    def __enter__(self) -> Store:
        return self.store

    def __exit__(self, *exc: object) -> None:
        self.store.close()
