"""A run is seen whole or not at all: ``archive_run`` writes the run's prices, manifest, features,
diagrams, alerts and commitment in one transaction. A child process is killed (SIGKILL) at each
named point inside those writes, on SQLite and on PostgreSQL; afterwards a reader sees exactly the
archive as it was before the run, ``verify`` passes, and archiving the run again gives what an
uninterrupted run gives.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from riskshape import monitor
from riskshape.archive import archive_run
from riskshape.compute.monitor import MonitorResult
from riskshape.errors import StoreError
from riskshape.store import Store, open_store, verify_chain

REPO = Path(__file__).resolve().parents[2]
POINTS = (
    "archive_run:portfolio",
    "archive_run:run",
    "archive_run:features",
    "archive_run:diagrams",
    "archive_run:alerts",
    "seal",
    "commit",
)
"""Every fault point inside archive_run's transaction, in the order the writes reach them."""
HELD_BACK = 15  # the run before the killed one stops this many days short


def _view(store: Store) -> dict[str, object]:
    """What readers of the portfolio see, without row ids (PostgreSQL's sequences skip ids after a rollback)."""
    frame = store.read_features("Fund North").frame
    ends = store.window_ends("Fund North")
    return {
        "runs": [(r.input_hash, r.n_dates, r.prices_added) for r in store.list_runs("Fund North")],
        "features": frame.to_json(date_format="iso", double_precision=15),
        "last diagram": store.read_diagram("Fund North", ends[-1], 1).bars.tobytes(),
        "alerts": [(a.rule, a.window_end, a.value, a.threshold) for a in store.list_alerts(limit=None).items],
        "events": [(e.kind, e.subject) for e in store.list_events() if e.kind != "records_sealed"],
        "commitments": len(store.list_events(kind="records_sealed")),
        "prices": store.read_prices("Fund North").to_json(date_format="iso", double_precision=15),
    }


@pytest.fixture(scope="module")
def earlier(computed: MonitorResult) -> MonitorResult:
    return monitor(computed.prices.iloc[:-HELD_BACK], computed.config)


@pytest.fixture(scope="module")
def uninterrupted(tmp_path_factory: pytest.TempPathFactory, computed: MonitorResult, earlier: MonitorResult):  # type: ignore[no-untyped-def]
    """The reader's view after the earlier run and the full run, archived without a crash."""
    url = f"sqlite:///{tmp_path_factory.mktemp('whole') / 'reference.sqlite'}"
    with open_store(url) as store:
        archive_run(store, "Fund North", earlier)
        archive_run(store, "Fund North", computed)
        return _view(store)


@pytest.mark.timeout(180)
@pytest.mark.parametrize("point", POINTS)
def test_a_run_killed_inside_its_writes_is_seen_whole_or_not_at_all(
    store: Store,
    store_url: str,
    computed: MonitorResult,
    earlier: MonitorResult,
    uninterrupted: dict[str, object],
    tmp_path: Path,
    point: str,
) -> None:
    archive_run(store, "Fund North", earlier)
    before = _view(store)
    prices, config = tmp_path / "prices.parquet", tmp_path / "config.json"
    computed.prices.to_parquet(prices)
    config.write_text(json.dumps(computed.config.to_mapping()), encoding="utf-8")
    path = os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    child = subprocess.run(
        [sys.executable, "-m", "tests.store.run_killer", store_url, str(prices), str(config), point],
        cwd=REPO,
        env={**os.environ, "PYTHONPATH": path},
        capture_output=True,
        text=True,
        timeout=150,
    )
    assert child.returncode == -signal.SIGKILL, f"the child was not killed at {point}: {child.stderr[-2000:]}"
    with open_store(store_url) as reader:  # a new reader after the crash
        assert _view(reader) == before  # nothing of the killed run is visible
        report = verify_chain(reader)
        assert report.ok, report.first_bad
        archive_run(reader, "Fund North", computed)  # the run again
        assert _view(reader) == uninterrupted
        assert verify_chain(reader).ok


def test_a_failure_inside_the_transaction_leaves_nothing(store: Store, computed: MonitorResult) -> None:
    with pytest.raises(StoreError, match="refused on purpose"), store.transaction():
        store.ensure_portfolio("Fund North")
        run = store.create_run("Fund North", _manifest(computed), computed.prices)
        store.write_features(run.id, computed.features)
        raise StoreError("refused on purpose")
    assert store.list_portfolios() == () and store.list_events() == ()
    assert verify_chain(store).ok and verify_chain(store).checked == 0


def _manifest(result: MonitorResult):  # type: ignore[no-untyped-def]
    from riskshape.store import RunManifest

    return RunManifest(
        config=result.config.to_mapping(),
        config_hash=result.config.hash(),
        input_hash=result.input_hash,
        package_version=result.package_version,
        source="fixture",
    )


def test_one_transaction_gives_a_run_one_commitment(store: Store, computed: MonitorResult) -> None:
    report = archive_run(store, "Fund North", computed)
    (sealed,) = store.list_events(kind="records_sealed")
    facts = sealed.data
    assert [r["id"] for r in facts["runs"]] == [report.run.id]
    assert facts["runs"][0]["input_hash"] == computed.input_hash
    assert facts["runs"][0]["config_hash"] == computed.config.hash()
    tables = facts["tables"]
    assert tables["features"]["count"] == report.features.added == len(computed.features)
    assert tables["diagrams"]["count"] == report.diagrams.added
    assert tables["prices"]["count"] == report.run.prices_added
    # the commitment comes after the run's alerts on the ledger: the last record the run wrote
    assert all(a.seq < sealed.seq for a in report.alerts.added)
