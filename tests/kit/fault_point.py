"""riskshape's command line with a kill -9 at a chosen write of the archive: the fault-injection child.

Usage: ``python -m tests.kit.fault_point LOG KILL_AT riskshape-arguments...`` (from the repository's
root, as the tests run it). It listens to every SQLAlchemy engine of the process and numbers its *write
events*: each INSERT, UPDATE or DELETE statement, and the COMMIT of a transaction that wrote. Just
before each event it appends one line to LOG (opened unbuffered, so a line is on disk before the event
runs):

* ``event N STATEMENT-HEAD`` before a write statement, and ``done N STATEMENT-HEAD`` after it ran
  (its rows written inside the transaction, not yet committed);
* ``commit N COUNTS`` before a commit, with the row count of every archive table as that transaction
  sees it, which is what the commit makes durable (``COUNTS`` is JSON; read with a raw DBAPI cursor,
  so it is neither counted nor logged itself);
* ``kill N WHAT`` when N equals KILL_AT, followed by ``SIGKILL`` sent to this very process: the kernel
  ends it on the spot (no ``finally``, no ``atexit``, no driver clean-up), exactly as ``kill -9`` from
  outside. ``WHAT`` is ``event``, ``done`` or ``commit``: either way the process dies inside an open write
  transaction, which is how the tests know that a kill landed inside the archive's writes.

KILL_AT 0 never kills (a reference run: the log then lists every write event of the operation). A
commit line before the kill line is a commit that completed: the next event only happens after the
DBAPI ``commit()`` returned. The service runs requests in worker threads; the tests send one request
at a time, so the events of one operation come from one thread.
"""

from __future__ import annotations

import json
import os
import re
import signal
import sys
import threading
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine

from riskshape.store.schema import metadata

WRITE = re.compile(r"^\s*(INSERT|UPDATE|DELETE)\b", re.IGNORECASE)
_WROTE = "fault_point_wrote"


class FaultPoint:
    """Numbers the write events of this process, logs them, and kills the process at one of them."""

    def __init__(self, log_path: str, kill_at: int) -> None:
        self.log = open(log_path, "a", buffering=1, encoding="utf-8")  # noqa: SIM115 (kept open until killed)
        self.kill_at = kill_at
        self.count = 0
        self.lock = threading.Lock()

    def _next(self, what: str, detail: str) -> None:
        with self.lock:
            self.count += 1
            if self.count == self.kill_at:
                self.log.write(f"kill {self.count} {what}\n")
                self.log.flush()
                os.fsync(self.log.fileno())
                os.kill(os.getpid(), signal.SIGKILL)
            self.log.write(f"{what} {self.count} {detail}\n")

    def before_execute(self, conn: Connection, cursor: Any, statement: str, *_: Any) -> None:
        if WRITE.match(statement):
            conn.info[_WROTE] = True
            self._next("event", " ".join(statement.split()[:3]))

    def after_execute(self, conn: Connection, cursor: Any, statement: str, *_: Any) -> None:
        if WRITE.match(statement):
            self._next("done", " ".join(statement.split()[:3]))

    def before_commit(self, conn: Connection) -> None:
        if not conn.info.pop(_WROTE, False):
            return
        counts = table_counts(conn.connection.dbapi_connection)
        self._next("commit", json.dumps(counts, sort_keys=True))

    def after_rollback(self, conn: Connection) -> None:
        conn.info.pop(_WROTE, None)


def table_counts(dbapi_connection: Any) -> dict[str, int]:
    """Rows in every archive table, read on a raw DBAPI connection (no SQLAlchemy events fire)."""
    cursor = dbapi_connection.cursor()
    try:
        counts = {}
        for table in metadata.sorted_tables:
            cursor.execute(f"SELECT count(*) FROM {table.name}")
            counts[table.name] = int(cursor.fetchone()[0])
        return counts
    finally:
        cursor.close()


def install(log_path: str, kill_at: int) -> FaultPoint:
    """Listen to every engine of this process (class-level events)."""
    point = FaultPoint(log_path, kill_at)
    sa.event.listen(Engine, "before_cursor_execute", point.before_execute)
    sa.event.listen(Engine, "after_cursor_execute", point.after_execute)
    sa.event.listen(Engine, "commit", point.before_commit)
    sa.event.listen(Engine, "rollback", point.after_rollback)
    return point


if __name__ == "__main__":
    install(sys.argv[1], int(sys.argv[2]))
    from riskshape.cli import main

    main(sys.argv[3:])
