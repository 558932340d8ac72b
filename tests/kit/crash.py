"""The parent side of the fault-injection tests and benchmark: start riskshape under
:mod:`tests.kit.fault_point`, read what it logged, and look at the archive it left.

An archive *view* is what a reader and the chain hold, apart from what differs between two honest
runs of the same work: time stamps, the hashes that cover them, surrogate ids and run ids (a run cut
by a crash may have committed its run record; the re-run then adds its own), API key secrets.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import httpx
import sqlalchemy as sa

from riskshape.store import open_store
from riskshape.store.schema import metadata
from tests.kit.service import free_port, wait_until_healthy

REPO = Path(__file__).resolve().parents[2]

# columns left out of a view: time stamps, hashes over them, surrogate and run ids, key material
_NOT_COMPARED = {
    "id",
    "run_id",
    "created_at",
    "recorded_at",
    "raised_at",
    "prev_hash",
    "entry_hash",
    "key_id",
    "key_hash",
    "prices_through_id",
}


@dataclass(frozen=True)
class FaultLog:
    """What a child under :mod:`tests.kit.fault_point` logged."""

    events: int  # write events that ran (the kill's own not counted)
    committed: dict[str, int] | None  # table counts at its last completed commit (None: no commit)
    killed_at: int | None  # the event it was killed at
    killed_what: str | None  # "event", "done" or "commit": each inside an open write transaction

    @property
    def inside_writes(self) -> bool:
        return self.killed_at is not None


def child_env() -> dict[str, str]:
    """The environment of a child: the repository's root importable (the ``tests`` package)."""
    path = os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    return {**os.environ, "PYTHONPATH": path}


def fault_command(log: Path, kill_at: int, args: list[str]) -> list[str]:
    """The command line of riskshape ``args`` under the fault point (``kill_at`` 0: never killed)."""
    return [sys.executable, "-m", "tests.kit.fault_point", str(log), str(kill_at), *args]


def run_cli(
    log: Path, kill_at: int, args: list[str], timeout: float = 300, *, forked: bool = False
) -> subprocess.CompletedProcess[str]:
    """Run a riskshape command under the fault point and wait for it (``forked``: see :class:`Forked`)."""
    if forked:
        output = log.with_suffix(".out")
        child = Forked(log, kill_at, args, output)
        code = child.wait(timeout)
        text = output.read_text(encoding="utf-8", errors="replace")
        return subprocess.CompletedProcess(args, code, text, text)
    return subprocess.run(
        fault_command(log, kill_at, args),
        cwd=REPO,
        env=child_env(),
        capture_output=True,
        text=True,
        timeout=timeout,
        check=False,
    )


class Forked:
    """A riskshape command under the fault point in a child forked from this (warm) process.

    The child installs the fault point and calls ``riskshape.cli.main(args)``, as ``python -m
    tests.kit.fault_point`` does, without a new interpreter's imports (about 2 s of CPU each): the
    benchmark's many trials fit in its time that way. Its output goes to ``output``. Call only from a
    process with no open database connections and no threads. Quacks like ``subprocess.Popen`` as far
    as the helpers here need.
    """

    def __init__(self, log: Path, kill_at: int, args: list[str], output: Path) -> None:
        from tests.kit import fault_point

        sys.stdout.flush()
        sys.stderr.flush()
        pid = os.fork()
        if pid == 0:  # the child: never returns
            code = 0
            try:
                sink = os.open(output, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
                os.dup2(sink, 1)
                os.dup2(sink, 2)
                fault_point.install(str(log), kill_at)
                from riskshape.cli import main

                main(args)
            except SystemExit as done:
                code = done.code if isinstance(done.code, int) else (0 if done.code is None else 1)
            except BaseException:  # the child's own failure: its traceback in its output
                import traceback

                traceback.print_exc()
                code = 1
            finally:
                sys.stdout.flush()
                sys.stderr.flush()
                os._exit(code)
        self.pid = pid
        self.returncode: int | None = None

    def poll(self) -> int | None:
        if self.returncode is None:
            done, status = os.waitpid(self.pid, os.WNOHANG)
            if done:
                self.returncode = os.waitstatus_to_exitcode(status)
        return self.returncode

    def wait(self, timeout: float | None = None) -> int:
        deadline = None if timeout is None else time.monotonic() + timeout
        while self.poll() is None:
            if deadline is not None and time.monotonic() > deadline:
                raise subprocess.TimeoutExpired(str(self.pid), timeout or 0)
            time.sleep(0.02)
        assert self.returncode is not None
        return self.returncode

    def terminate(self) -> None:
        if self.poll() is None:
            os.kill(self.pid, signal.SIGTERM)

    def kill(self) -> None:
        if self.poll() is None:
            os.kill(self.pid, signal.SIGKILL)


def read_log(log: Path) -> FaultLog:
    """Parse a fault-point log."""
    events, committed, killed_at, killed_what = 0, None, None, None
    for line in log.read_text(encoding="utf-8").splitlines():
        what, number, *rest = line.split(" ", 2)
        if what == "kill":
            killed_at, killed_what = int(number), rest[0]
            continue
        events = int(number)
        if what == "commit":
            committed = json.loads(rest[0])
    return FaultLog(events, committed, killed_at, killed_what)


def table_counts(url: str) -> dict[str, int]:
    """Rows in every archive table."""
    with open_store(url, create=False) as store, store.engine.connect() as connection:
        return {
            t.name: int(connection.execute(sa.select(sa.func.count()).select_from(t)).scalar_one())
            for t in metadata.sorted_tables
        }


# payload fields that name a run or a new alert by id, by event kind (the rest of each payload compared)
_IDS_IN_PAYLOAD = {
    "day_state": ("run",),
    "window_superseded": ("run",),
    "alert_superseded": ("run",),  # its "alert" is an alert archived before the correction: compared
    "alert_raised_by_correction": ("run", "alert"),  # the alert it raised, a new row (its subject too)
}


def _ids_masked(payload: object, fields: tuple[str, ...]) -> object:
    """An event's payload with the ids in ``fields`` masked (the rest of it compared as it is)."""
    data = json.loads(str(payload))
    for field in fields:
        if field in data:
            data[field] = "<masked>"
    return json.dumps(data, sort_keys=True)


def _commitments_masked(rows: Sequence[Any], columns: list[str]) -> list[tuple[object, ...]]:
    """Events with what two honest runs differ in masked: a commitment's sequence number, subject and
    payload name the row-id and run ranges it covers, which depend on how the work was split into
    commits (a redo commits what a kill cut apart; ``audit verify`` checks them); a key event's
    subject and payload carry the key's id, time and token digest (key material, as ``key_id`` above);
    a day state's payload, and a correction's chained records, name its run by id (``run_id`` above: on
    PostgreSQL a transaction cut by a kill has used up sequence values, so the redo's run gets a later id
    than the reference's), and an ``alert_raised_by_correction`` names the new alert by id (``id`` above).
    """
    seq, subject, payload, kind = (columns.index(c) for c in ("seq", "subject", "payload", "kind"))
    masked = {
        "records_sealed": {seq, subject, payload},
        "key_created": {subject, payload},
        "key_revoked": {subject, payload},
        "alert_raised_by_correction": {subject},
    }
    out = []
    for r in rows:
        row = tuple("<masked>" if i in masked.get(str(r[kind]), ()) else v for i, v in enumerate(r))
        if fields := _IDS_IN_PAYLOAD.get(str(r[kind])):
            row = tuple(_ids_masked(v, fields) if i == payload else v for i, v in enumerate(row))
        out.append(row)
    return out


def archive_view(url: str, tables: tuple[str, ...] | None = None) -> dict[str, list[tuple[object, ...]]]:
    """Every table's rows, sorted, without the columns two honest runs of the same work differ in
    (``runs`` is kept as its configuration and input hashes only; ``portfolio_id`` becomes the name).
    """
    view: dict[str, list[tuple[object, ...]]] = {}
    with open_store(url, create=False) as store, store.engine.connect() as connection:
        names = {int(i): str(n) for i, n in connection.execute(sa.text("SELECT id, name FROM portfolios"))}
        for table in metadata.sorted_tables:
            if tables is not None and table.name not in tables:
                continue
            if table.name == "runs":
                rows = connection.execute(sa.select(table.c.config_hash, table.c.input_hash).distinct())
                view["runs"] = sorted(tuple(r) for r in rows)
                continue
            kept = [c for c in table.columns if c.name not in _NOT_COMPARED]
            rows = connection.execute(sa.select(*kept)).all()
            if table.name == "events":
                rows = _commitments_masked(rows, [c.name for c in kept])
            at = [i for i, c in enumerate(kept) if c.name == "portfolio_id"]
            view[table.name] = sorted(
                (tuple(names.get(v) if i in at else v for i, v in enumerate(r)) for r in rows), key=repr
            )
    return view


@dataclass
class Server:
    """``riskshape serve`` under the fault point, on a free port of the loopback."""

    process: subprocess.Popen[bytes] | Forked
    base: str
    log: Path

    def stop(self) -> None:
        if self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait(timeout=20)


def start_server(
    url: str, config: Path, fault_log: Path, kill_at: int, output: Path, *, forked: bool = False
) -> Server:
    """Start the service on ``url`` under the fault point and wait until it answers."""
    port = free_port()
    args = ["serve", "--store", url, "--host", "127.0.0.1", "--port", str(port), "--config", str(config)]
    process: subprocess.Popen[bytes] | Forked
    if forked:
        process = Forked(fault_log, kill_at, args, output)
    else:
        with output.open("wb") as sink:
            process = subprocess.Popen(
                fault_command(fault_log, kill_at, args),
                cwd=REPO,
                env=child_env(),
                stdout=sink,
                stderr=subprocess.STDOUT,
            )
    base = f"http://127.0.0.1:{port}"
    server = Server(process, base, output)
    try:
        wait_until_healthy(process, base, output)
    except BaseException:
        server.stop()
        raise
    return server


def post_prices(
    server: Server, portfolio: str, body: bytes, key: str, *, correction: bool = False
) -> httpx.Response | None:
    """POST a CSV body (``correction``: with ``correction=true``); None when the connection dropped (the
    server was killed while answering).
    """
    try:
        return httpx.post(
            f"{server.base}/v1/portfolios/{portfolio}/prices",
            content=body,
            params={"correction": "true"} if correction else None,
            headers={"X-Riskshape-Key": key, "Content-Type": "text/csv"},
            timeout=120,
        )
    except httpx.TransportError:
        return None


def wait_killed(process: subprocess.Popen[bytes] | Forked, seconds: float = 60) -> int:
    """Wait for a process to end; its return code (-9 when killed by SIGKILL)."""
    deadline = time.monotonic() + seconds
    while process.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    if process.poll() is None:
        process.kill()
    return process.wait(timeout=20)
