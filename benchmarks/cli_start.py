"""Start-up of the quick commands: ``riskshape --version``, ``alerts list`` and ``audit head`` on a
10,000-alert archive, each timed against ``python -c pass`` in the same run (``farm-bench --vs``).

1. builds (or reuses, with ``--archive``) a SQLite archive of fictional portfolios holding
   ``--alerts`` alerts on the chain (20 portfolios, one run each; the alerts are written through
   :meth:`riskshape.store.Store.append_alerts`, as a run writes them);
2. for each command, runs ``farm-bench -n RUNS --vs '<python> -c pass' -- <riskshape> ...``: the
   two commands alternate and the ratio is taken pair by pair, so it keeps its meaning on a busy
   machine; ``farm-bench`` prints the medians (wall, cpu, peak memory) and the ratio;
3. prints the machine load (``uptime``) before and after.

    python benchmarks/cli_start.py --runs 10
    python benchmarks/cli_start.py --archive /tmp/alerts.sqlite --runs 10   # keep the archive

Target (issue 12, item 7): each command under 0.5 s. riskshape is a decision aid, not investment
advice; these are figures of the software.
"""

from __future__ import annotations

import argparse
import hashlib
import shlex
import shutil
import subprocess
import sys
import tempfile
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


def main(argv: list[str] | None = None) -> int:
    """Build the archive and time the commands; see the module notes."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--alerts", type=int, default=10_000, help="alerts in the archive (default 10000)")
    parser.add_argument("--runs", type=int, default=10, help="timed pairs per command (default 10)")
    parser.add_argument("--archive", type=Path, default=None, help="keep the archive here (reused if it exists)")
    args = parser.parse_args(argv)
    if shutil.which("farm-bench") is None:
        raise SystemExit("farm-bench is not on PATH")
    print(CAUTION)
    with tempfile.TemporaryDirectory(prefix="riskshape-cli-") as folder:
        path = args.archive or Path(folder) / "alerts.sqlite"
        url = f"sqlite:///{path}" if path.exists() else build_archive(path, args.alerts)
        riskshape = str(Path(sys.executable).with_name("riskshape"))
        baseline = f"{shlex.quote(sys.executable)} -c pass"
        commands = (
            [riskshape, "--version"],
            [riskshape, "alerts", "list", "--store", url],
            [riskshape, "audit", "head", "--store", url],
        )
        print(f"archive: {url} ({args.alerts} alerts)")
        print(f"load before: {_uptime()}")
        for command in commands:
            line = ["farm-bench", "-n", str(args.runs), "--vs", baseline, "--", *command]
            print(f"\n$ {shlex.join(line)}", flush=True)
            subprocess.run(line, check=False)
        print(f"\nload after: {_uptime()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
