"""Crash safety and concurrent writers, with real processes on SQLite and PostgreSQL."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa

from riskshape.store import Store, chain_head, verify_chain
from tests.kit.archive import make_alerts

REPO = Path(__file__).resolve().parents[2]  # the writer runs as ``python -m tests.kit.archive_writer`` from here


def _writer(
    url: str, run_id: int, rule: str, count: int, errors: Path, go_file: Path | None = None
) -> subprocess.Popen[str]:
    """Start a writer; its stderr goes to ``errors`` so stdout is the one pipe (communicate() then reads
    through the same buffer as readline(), and no line is lost).
    """
    args = [sys.executable, "-m", "tests.kit.archive_writer", url, str(run_id), rule, str(count)]
    args += [str(go_file)] if go_file else []
    # the writer imports the test kits as the tests do: the tests package from the repository's root
    path = os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    with errors.open("w") as sink:
        return subprocess.Popen(
            args, stdout=subprocess.PIPE, stderr=sink, text=True, cwd=REPO, env={**os.environ, "PYTHONPATH": path}
        )


def _ledger(store: Store) -> dict[tuple[str, int], int]:
    """(table, id) -> seq of every archived alert and review."""
    with store.engine.connect() as connection:
        rows = connection.execute(
            sa.text("SELECT 'alert', id, seq FROM alerts UNION ALL SELECT 'review', id, seq FROM reviews")
        )
        return {(kind, int(i)): int(seq) for kind, i, seq in rows}


@pytest.mark.timeout(120)
def test_sigkill_mid_writing_loses_no_committed_alert(store: Store, store_url: str, run, tmp_path: Path) -> None:
    base = chain_head(store).count  # the commitments of the portfolio and its run
    errors = tmp_path / "writer.err"
    child = _writer(store_url, run.id, "crash_rule", 2_000, errors)  # far more than it gets to write
    assert child.stdout is not None
    committed: list[str] = []
    for line in child.stdout:  # the child prints only after each commit
        committed.append(line.split())
        if len(committed) >= 60:
            os.kill(child.pid, signal.SIGKILL)
            break
    rest, _ = child.communicate()
    committed += [line.split() for line in rest.splitlines()]  # printed before the kill landed
    assert child.returncode == -signal.SIGKILL, errors.read_text()
    archived = _ledger(store)
    for kind, record_id, seq in committed:
        assert archived.get((kind, int(record_id))) == int(seq), f"committed {kind} {record_id} lost"
    assert len(archived) >= len(committed)  # at most the commit in flight is there but unprinted
    report = verify_chain(store)
    assert report.ok, report.first_bad
    assert report.head.count == base + len(archived)
    assert sorted(archived.values()) == list(range(base + 1, base + len(archived) + 1))


@pytest.mark.timeout(120)
def test_two_writers_at_once_never_fork_the_chain(store: Store, store_url: str, run, tmp_path: Path) -> None:
    # Writer 1 is a child process, writer 2 is this test's process; both start on the same signal.
    base = chain_head(store).count  # the commitments of the portfolio and its run
    go = tmp_path / "go"
    errors = tmp_path / "writer.err"
    child = _writer(store_url, run.id, "writer_1", 40, errors, go)
    assert child.stdout is not None and child.stdout.readline().strip() == "ready"
    go.touch()
    mine: list[tuple[str, int, int]] = []
    first_of_theirs: list[str] = []
    rng = np.random.default_rng(7)
    for n, alert in enumerate(make_alerts(rng, 40, rule="writer_2", start="2030-01-01"), start=1):
        record = store.append_alerts([alert], run.id).added[0]
        mine.append(("alert", record.id, record.seq))
        if n % 5 == 0:
            review = store.append_review(record.id, "acknowledge", "writer_2 reviewer")
            mine.append(("review", review.id, review.seq))
        if n == 1:  # wait for the child's first commit, so the two surely overlap from here on
            first_of_theirs = child.stdout.readline().split()
        time.sleep(0.01)  # leave the other writer a gap, as the child does
    out, _ = child.communicate()
    assert child.returncode == 0, errors.read_text()  # the child never failed on a lock or a constraint
    theirs = [
        (kind, int(i), int(seq))
        for kind, i, seq in (line.split() for line in [" ".join(first_of_theirs)] + out.splitlines())
    ]
    assert len(theirs) == len(mine) == 40 + 8
    mine_seqs, their_seqs = [seq for *_, seq in mine], [seq for *_, seq in theirs]
    # the two really wrote at the same time: each wrote both before and after the other's first record
    assert min(mine_seqs) < max(their_seqs) and min(their_seqs) < max(mine_seqs)
    archived = _ledger(store)
    assert archived == {(kind, i): seq for kind, i, seq in mine + theirs}
    assert sorted(archived.values()) == list(range(base + 1, base + 2 * 48 + 1))  # every place taken exactly once
    report = verify_chain(store)
    assert report.ok and report.head.count == base + 2 * 48
