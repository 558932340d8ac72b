"""Tamper fuzz: random edits, deletions, insertions and swaps in every table of an archive, and cut
tails: ``verify`` (with a head kept elsewhere) catches 100% of them and names the first bad record.

SQLite: the pre-built archive is copied per case, and the change is made in the copy with the
append-only triggers dropped and foreign keys off, as anyone holding the file can, then verified
from a fresh connection. PostgreSQL: copying a schema per case costs seconds, so the change is made
with every trigger off (``session_replication_role = replica``) inside a transaction, verified
inside it and rolled back. Case counts come from the settings profiles below: 10 tables x 4 kinds x
6 = 240 changes plus 20 cut tails on SQLite (260 cases), 40 x 1 plus 5 on PostgreSQL (45 cases).
"""

from __future__ import annotations

import shutil
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest
import sqlalchemy as sa
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from riskshape.compute.monitor import MonitorResult
from riskshape.store import Store, chain_head, open_store, verify_chain
from riskshape.store.database import write_transaction
from riskshape.store.schema import APPEND_ONLY_TABLES
from tests.kit.postgres import fresh_schema_url, postgres_unreachable
from tests.store.tampering import KINDS, TABLES, Tamper, apply, build_archive, cut_tail

settings.register_profile(
    "tamper-sqlite", max_examples=6, derandomize=True, deadline=None, suppress_health_check=[HealthCheck.too_slow]
)
settings.register_profile(
    "tamper-postgres", max_examples=1, derandomize=True, deadline=None, suppress_health_check=[HealthCheck.too_slow]
)
CUT_CASES = {"sqlite": 20, "postgres": 5}

picks = st.integers(min_value=0, max_value=10_000)


@pytest.fixture(scope="module")
def base_file(tmp_path_factory: pytest.TempPathFactory, computed: MonitorResult) -> Iterator[tuple[Path, str]]:
    """The pre-built SQLite archive (closed, so it is whole in one file) and its head."""
    path = tmp_path_factory.mktemp("tamper") / "base.sqlite"
    with open_store(f"sqlite:///{path}") as store:
        build_archive(store, computed)
        assert verify_chain(store).ok
        head = str(chain_head(store))
    assert not path.with_name("base.sqlite-wal").exists() or path.with_name("base.sqlite-wal").stat().st_size == 0
    yield path, head


def _judge(tamper: Tamper, store: Store, head: str) -> None:
    report = verify_chain(store, expect_head=head)
    assert not report.ok, f"{tamper} went unnoticed"
    bad = report.first_bad
    assert bad is not None and bad.table in tamper.expected, (tamper, str(bad))
    if tamper.record_id is not None:
        assert bad.record_id == tamper.record_id, (tamper, str(bad))
    if tamper.kind == "cut":
        assert "tail cut" in bad.reason, (tamper, str(bad))
    if tamper.table == "api_keys":
        keys = tamper.key if isinstance(tamper.key, tuple) else (tamper.key,)
        assert any(str(k) in bad.reason for k in keys), (tamper, str(bad))


def _tamper_a_copy(
    base_file: tuple[Path, str],
    tmp_path_factory: pytest.TempPathFactory,
    edit: Callable[[sa.Connection], Tamper],
) -> None:
    """Copy the base archive, drop its guards as anyone holding the file can, edit it, judge verify."""
    base, head = base_file
    tmp = tmp_path_factory.mktemp("case")
    copy = tmp / "case.sqlite"
    shutil.copyfile(base, copy)
    url = f"sqlite:///{copy}"
    with open_store(url) as store, store.engine.connect() as connection:
        connection.connection.driver_connection.execute("PRAGMA foreign_keys = OFF")
        with connection.begin():
            for name in APPEND_ONLY_TABLES:
                for action in ("update", "delete"):
                    connection.exec_driver_sql(f"DROP TRIGGER IF EXISTS {name}_no_{action}")
            tamper = edit(connection)
    with open_store(url) as fresh:
        _judge(tamper, fresh, head)
    shutil.rmtree(tmp)


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("table", TABLES)
@settings(settings.get_profile("tamper-sqlite"))
@given(pick=picks, pick_column=picks, pick_other=picks)
def test_sqlite_tamper_is_caught(
    base_file: tuple[Path, str],
    tmp_path_factory: pytest.TempPathFactory,
    table: str,
    kind: str,
    pick: int,
    pick_column: int,
    pick_other: int,
) -> None:
    _tamper_a_copy(base_file, tmp_path_factory, lambda c: apply(c, kind, table, pick, pick_column, pick_other))


@settings(settings.get_profile("tamper-sqlite"), max_examples=CUT_CASES["sqlite"])
@given(records=st.integers(min_value=1, max_value=8), with_rows=st.booleans())
def test_sqlite_cut_tail_is_caught_against_a_kept_head(
    base_file: tuple[Path, str], tmp_path_factory: pytest.TempPathFactory, records: int, with_rows: bool
) -> None:
    _tamper_a_copy(base_file, tmp_path_factory, lambda c: cut_tail(c, records, with_rows))


class _Undo(Exception):
    """Raised to roll a PostgreSQL case back."""


@pytest.fixture(scope="module")
def pg_base(computed: MonitorResult) -> Iterator[tuple[Store, str]]:
    if postgres_unreachable():
        pytest.skip("PostgreSQL at 127.0.0.1:5432 does not answer")
    with fresh_schema_url("rs_tamper") as url, open_store(url) as store:
        build_archive(store, computed)
        assert verify_chain(store).ok
        yield store, str(chain_head(store))


def _pg_case(store: Store, head: str, change: Callable[[sa.Connection], Tamper]) -> None:
    with pytest.raises(_Undo), write_transaction(store.engine) as connection:
        connection.exec_driver_sql("SET LOCAL session_replication_role = replica")
        tamper = change(connection)
        _judge(tamper, store, head)  # verify reads inside this transaction: it sees the change
        raise _Undo
    assert verify_chain(store, expect_head=head).ok  # rolled back whole


@pytest.mark.postgres
@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("table", TABLES)
@settings(settings.get_profile("tamper-postgres"))
@given(pick=picks, pick_column=picks, pick_other=picks)
def test_postgres_tamper_is_caught(
    pg_base: tuple[Store, str], table: str, kind: str, pick: int, pick_column: int, pick_other: int
) -> None:
    store, head = pg_base
    _pg_case(store, head, lambda connection: apply(connection, kind, table, pick, pick_column, pick_other))


@pytest.mark.postgres
@settings(settings.get_profile("tamper-postgres"), max_examples=CUT_CASES["postgres"])
@given(records=st.integers(min_value=1, max_value=8), with_rows=st.booleans())
def test_postgres_cut_tail_is_caught_against_a_kept_head(
    pg_base: tuple[Store, str], records: int, with_rows: bool
) -> None:
    store, head = pg_base
    _pg_case(store, head, lambda connection: cut_tail(connection, records, with_rows))
