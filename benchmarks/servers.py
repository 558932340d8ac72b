"""Servers of the service benchmarks: start one on a free loopback port, wait until it answers, stop it.

Used by ``benchmarks/read_path.py``, ``benchmarks/service_load.py`` and ``benchmarks/daily_service.py``
(run as scripts: this folder is then on ``sys.path``). Loopback only; nothing leaves the machine.
riskshape is a decision aid, not investment advice.
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from collections.abc import Mapping, Sequence
from pathlib import Path

import httpx

__all__ = ["BENCH_SETTINGS", "free_port", "memory_mib", "start_process", "start_riskshape", "stop", "uptime"]

BENCH_SETTINGS = {
    "RISKSHAPE_RATE_LIMIT_PER_MINUTE": "1000000000",
    "RISKSHAPE_RATE_LIMIT_BURST": "1000000000",
    "RISKSHAPE_LOG_LEVEL": "warning",
}
"""Settings every benchmark server runs with: no rate limit in the way, warnings only in its log."""


def free_port() -> int:
    """A TCP port on 127.0.0.1 that nothing listens on (now)."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def stop(process: subprocess.Popen[bytes]) -> None:
    """Ask a server to stop (SIGTERM); kill it if it has not after 30 s."""
    if process.poll() is not None:
        return
    process.terminate()
    try:
        process.wait(timeout=30)
    except subprocess.TimeoutExpired:
        process.kill()
        process.wait(timeout=30)


def start_process(
    command: Sequence[str],
    ready_url: str,
    log: Path,
    *,
    env: Mapping[str, str] | None = None,
    cwd: Path | None = None,
    timeout: float = 120.0,
) -> subprocess.Popen[bytes]:
    """Start ``command`` (its standard error to ``log``) and wait until ``GET ready_url`` answers 200.

    Raises
    ------
    SystemExit
        If the process ends or does not answer within ``timeout`` seconds (it is stopped; the
        message ends with the tail of its log).
    """
    with log.open("wb") as err:
        process = subprocess.Popen(list(command), stdout=subprocess.DEVNULL, stderr=err, env=env, cwd=cwd)
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        try:
            if httpx.get(ready_url, timeout=2).status_code == 200:
                return process
        except httpx.TransportError:
            pass
        if process.poll() is not None:
            break
        time.sleep(0.2)
    stop(process)
    tail = log.read_text(errors="replace")[-2000:]
    raise SystemExit(f"a server did not start ({' '.join(command[:4])} ...); the end of {log}:\n{tail}")


def start_riskshape(
    store_url: str,
    folder: Path,
    *,
    settings: Mapping[str, str] | None = None,
    config: Path | None = None,
    workers: int = 1,
    log_name: str = "server.log",
    timeout: float = 120.0,
) -> tuple[subprocess.Popen[bytes], str]:
    """Start ``riskshape serve`` over ``store_url`` on a free loopback port; wait until its health answers.

    Parameters
    ----------
    store_url : str
        The archive.
    folder : Path
        Where the server's log (``log_name``) is written.
    settings : mapping, optional
        ``RISKSHAPE_*`` variables on top of :data:`BENCH_SETTINGS` and the environment.
    config : Path, optional
        TOML configuration (``--config``).
    workers : int
        Worker processes (``--workers``).

    Returns
    -------
    (process, base URL)
    """
    port = free_port()
    env = {**os.environ, **BENCH_SETTINGS, **(settings or {})}
    command = [sys.executable, "-m", "riskshape", "serve", "--store", store_url, "--host", "127.0.0.1"]
    command += ["--port", str(port), "--workers", str(workers)]
    if config is not None:
        command += ["--config", str(config)]
    base = f"http://127.0.0.1:{port}"
    process = start_process(command, f"{base}/v1/health", folder / log_name, env=env, timeout=timeout)
    return process, base


def memory_mib(pid: int) -> tuple[float, float]:
    """Resident and peak resident memory of a process, MiB (Linux ``/proc/PID/status``: VmRSS, VmHWM)."""
    fields = {}
    for line in Path(f"/proc/{pid}/status").read_text(encoding="utf-8").splitlines():
        name, _, value = line.partition(":")
        if name in ("VmRSS", "VmHWM"):
            fields[name] = int(value.split()[0]) / 1024  # kB
    return fields["VmRSS"], fields["VmHWM"]


def uptime() -> str:
    """The output of ``uptime`` (the machine's load, printed beside every figure)."""
    return subprocess.run(["uptime"], capture_output=True, text=True, check=False).stdout.strip()
