"""Start-up of the quick commands: ``riskshape --version``, ``alerts list`` and ``audit head`` on a
10,000-alert archive, each timed against ``python -c pass`` in the same run.

1. builds (or reuses, with ``--archive``) a SQLite archive of fictional portfolios holding
   ``--alerts`` alerts on the chain (20 portfolios, one run each; the alerts are written through
   :meth:`riskshape.store.Store.append_alerts`, as a run writes them);
2. for each command, starts it and ``python -c pass`` in turn (``--runs`` pairs after one
   warm-up pair), each a fresh process timed from outside: CPU is the operating system's user +
   system seconds of the finished child (``os.wait4``), wall a monotonic clock around it. The
   ratio is taken pair by pair, so it keeps its meaning on a busy machine; the medians are printed
   with min and max;
3. prints the machine load (``uptime``) before and after.

    python benchmarks/cli_start.py --runs 10
    python benchmarks/cli_start.py --archive /tmp/alerts.sqlite --runs 10   # keep the archive

Target (issue 12, item 7): each command under 0.5 s. riskshape is a decision aid, not investment
advice; these are figures of the software.
"""

from __future__ import annotations

import argparse
import hashlib
import os
import shlex
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pandas as pd

from riskshape import Config, __version__
from riskshape.alerts.model import Alert, Firing
from riskshape.caution import CAUTION
from riskshape.store import RunManifest, open_store

PORTFOLIOS = 20
RULES = (("corr-level", "mean_correlation", "level"), ("loops-z", "h1_landscape_l1", "zscore"))


def _digest(*parts: object) -> str:
    return hashlib.sha256(repr(parts).encode("utf-8")).hexdigest()


def build_archive(path: Path, n_alerts: int) -> str:
    """A SQLite archive at ``path`` with ``n_alerts`` alerts over :data:`PORTFOLIOS` fictional portfolios."""
    url = f"sqlite:///{path}"
    config = Config()
    per_portfolio = -(-n_alerts // PORTFOLIOS)
    days = pd.bdate_range("2031-01-02", periods=-(-per_portfolio // len(RULES)))
    raised = datetime(2031, 6, 1, 18, tzinfo=timezone.utc)
    written = 0
    with open_store(url) as store:
        for p in range(PORTFOLIOS):
            name = f"book-{p:02d}"
            store.ensure_portfolio(name)
            manifest = RunManifest(
                config=config.to_mapping(),
                config_hash=config.hash(),
                input_hash=_digest("prices", name),
                package_version=__version__,
                source="benchmark",
            )
            run = store.create_run(name, manifest)
            alerts = []
            for k, day in enumerate(days):
                for rule, summary, kind in RULES:
                    if written + len(alerts) >= n_alerts or len(alerts) >= per_portfolio:
                        break
                    firing = Firing(rule, summary, kind, day, 0.5 + k * 1e-3, 0.4, "warning")  # type: ignore[arg-type]
                    alerts.append(
                        Alert(
                            portfolio=name,
                            firing=firing,
                            raised_at=raised + timedelta(days=k),
                            config_hash=config.hash(),
                            inputs_hash=_digest(name, day, rule),
                            package_version=__version__,
                        )
                    )
            written += len(store.append_alerts(alerts, run.id).added)
        total = store.list_alerts(limit=0).total
    if total != n_alerts:
        raise SystemExit(f"built {total} alerts, wanted {n_alerts}")
    return url


def _uptime() -> str:
    return subprocess.run(["uptime"], capture_output=True, text=True, check=False).stdout.strip()


def time_process(command: list[str]) -> tuple[float, float]:
    """(CPU seconds, wall seconds) of one run of ``command``, its output thrown away; exits non-zero stop."""
    began = time.perf_counter()
    child = subprocess.Popen(command, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(child.pid, 0)
    wall = time.perf_counter() - began
    assert child.stderr is not None
    errors = child.stderr.read().decode(errors="replace").strip()
    child.stderr.close()
    if status != 0:
        raise SystemExit(f"{shlex.join(command)} failed ({status}): {errors}")
    return usage.ru_utime + usage.ru_stime, wall


def _spread(values: list[float]) -> str:
    return f"{statistics.median(values):.3f} ({min(values):.3f} to {max(values):.3f})"


def compare(command: list[str], baseline: list[str], runs: int) -> None:
    """Run ``command`` and ``baseline`` in turn ``runs`` times (after a warm-up pair) and print the figures."""
    time_process(command), time_process(baseline)
    pairs = [(time_process(command), time_process(baseline)) for _ in range(runs)]
    cpu = [a[0] for a, _ in pairs]
    wall = [a[1] for a, _ in pairs]
    base = [b[0] for _, b in pairs]
    ratio = [a[0] / b[0] for a, b in pairs]
    print(f"  CPU s  median (min to max): {_spread(cpu)}")
    print(f"  wall s median (min to max): {_spread(wall)}")
    print(f"  python -c pass, CPU s:      {_spread(base)}")
    print(f"  ratio to python -c pass:    {_spread(ratio)} (pair by pair)")


def main(argv: list[str] | None = None) -> int:
    """Build the archive and time the commands; see the module notes."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--alerts", type=int, default=10_000, help="alerts in the archive (default 10000)")
    parser.add_argument("--runs", type=int, default=10, help="timed pairs per command (default 10)")
    parser.add_argument("--archive", type=Path, default=None, help="keep the archive here (reused if it exists)")
    args = parser.parse_args(argv)
    print(CAUTION)
    with tempfile.TemporaryDirectory(prefix="riskshape-cli-") as folder:
        path = args.archive or Path(folder) / "alerts.sqlite"
        url = f"sqlite:///{path}" if path.exists() else build_archive(path, args.alerts)
        riskshape = str(Path(sys.executable).with_name("riskshape"))
        baseline = [sys.executable, "-c", "pass"]
        commands = (
            [riskshape, "--version"],
            [riskshape, "alerts", "list", "--store", url],
            [riskshape, "audit", "head", "--store", url],
        )
        print(f"archive: {url} ({args.alerts} alerts); {args.runs} pairs per command")
        print(f"load before: {_uptime()}")
        for command in commands:
            print(f"\n$ {shlex.join(command)}", flush=True)
            compare(command, baseline, args.runs)
        print(f"\nload after: {_uptime()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
