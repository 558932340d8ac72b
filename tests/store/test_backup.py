"""``riskshape backup``: a copy taken while another thread writes verifies and holds every record
committed before the backup began; a refused backup leaves nothing; restoring is the same command back.

What "consistent" means here is SQLite's own promise for its online backup API
(https://sqlite.org/backup.html): the copy is a snapshot of the database at one moment.
"""

from __future__ import annotations

import sqlite3
import threading
from pathlib import Path

import pytest

from riskshape.cli import main
from riskshape.errors import StoreError
from riskshape.store import backup_store, chain_head, open_store, verify_chain


def _writer(url: str, stop: threading.Event, written: list[int]) -> None:
    with open_store(url) as store:
        while not stop.is_set():
            record = store.append_event("load_test", {"n": len(written)}, actor="writer")
            written.append(record.seq)


def test_backup_under_write_load_holds_every_record_committed_before_it(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'live.sqlite'}"
    open_store(url).close()
    stop, written = threading.Event(), []
    thread = threading.Thread(target=_writer, args=(url, stop, written), daemon=True)
    thread.start()
    try:
        while len(written) < 20:
            stop.wait(0.01)
        with open_store(url, create=False) as store:
            before = chain_head(store)  # every record committed before the backup began
            report = backup_store(store, tmp_path / "copy.sqlite")
        after_count = len(written)
    finally:
        stop.set()
        thread.join(timeout=30)
    assert before.count >= 20
    assert report.verified
    assert before.count <= report.head.count <= after_count + 1
    with sqlite3.connect(report.path) as db:  # one self-contained file, as written (before anything opens it)
        assert db.execute("PRAGMA journal_mode").fetchone()[0] == "delete"
    with open_store(f"sqlite:///{report.path}", create=False) as copy:
        checked = verify_chain(copy, expect_head=str(before))  # the earlier head is a prefix of the copy
        assert checked.ok, checked.first_bad
        assert checked.head == report.head


def test_backup_refuses_an_existing_target_and_leaves_nothing(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'live.sqlite'}"
    target = tmp_path / "copy.sqlite"
    target.write_bytes(b"keep me")
    with open_store(url) as store, pytest.raises(StoreError, match="already exists"):
        backup_store(store, target)
    assert target.read_bytes() == b"keep me"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["copy.sqlite", "live.sqlite"]


def test_backup_and_restore_from_the_command_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    url = f"sqlite:///{tmp_path / 'live.sqlite'}"
    with open_store(url) as store:
        for n in range(5):
            store.append_event("load_test", {"n": n}, actor="writer")
        head = chain_head(store)
    main(["backup", "--store", url, "--to", str(tmp_path / "copy.sqlite")])
    out = capsys.readouterr().out
    assert f"head:     {head}" in out and "verified" in out
    # restoring: the same command back, to the archive's path (the damaged file moved aside)
    (tmp_path / "live.sqlite").rename(tmp_path / "damaged.sqlite")
    main(["backup", "--store", f"sqlite:///{tmp_path / 'copy.sqlite'}", "--to", str(tmp_path / "live.sqlite")])
    with open_store(url, create=False) as restored:
        report = verify_chain(restored, expect_head=str(head))
    assert report.ok and report.head == head
