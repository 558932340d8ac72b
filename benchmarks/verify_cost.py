"""What ``audit verify`` costs now that it recomputes the commitments (runs, prices, features,
diagrams, portfolios, API keys) besides the ledger's hash chain.

    python benchmarks/verify_cost.py                       # builds the demo archive in a temporary folder
    python benchmarks/verify_cost.py --store sqlite:///riskshape-demo/riskshape.sqlite

Times, alternating in one process, the chain alone (what verify did before the commitments: the
coverage check switched off) and the whole of verify on the same archive; prints the medians,
their ratio, the rows covered and the machine's load.
"""

from __future__ import annotations

import argparse
import os
import statistics
import tempfile
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import sqlalchemy as sa

from riskshape.store import chain as chain_module
from riskshape.store import open_store, verify_chain


@contextmanager
def chain_only() -> Iterator[None]:
    """Verify as it was before the commitments: the coverage check replaced by one that finds nothing."""
    saved = chain_module.check_coverage
    chain_module.check_coverage = lambda connection: None
    try:
        yield
    finally:
        chain_module.check_coverage = saved


def demo_archive(folder: Path) -> str:
    from click.testing import CliRunner

    from riskshape.cli import main

    outcome = CliRunner().invoke(main, ["demo", "--out", str(folder)])
    if outcome.exit_code != 0:
        raise SystemExit(outcome.output)
    return f"sqlite:///{folder / 'riskshape.sqlite'}"


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--store", default=None, help="archive URL (default: a fresh demo archive)")
    parser.add_argument("--repeats", type=int, default=7)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as folder:
        url = args.store or demo_archive(Path(folder) / "demo")
        with open_store(url, create=False) as store:
            with store.engine.connect() as connection:
                rows = {
                    table: int(connection.execute(sa.text(f"SELECT count(*) FROM {table}")).scalar_one())
                    for table in ("ledger", "runs", "prices", "features", "diagrams", "api_keys")
                }
            verify_chain(store)  # warm the caches once
            before: list[float] = []
            after: list[float] = []
            for _ in range(args.repeats):
                with chain_only():
                    start = time.perf_counter()
                    assert verify_chain(store).ok
                    before.append(time.perf_counter() - start)
                start = time.perf_counter()
                report = verify_chain(store)
                after.append(time.perf_counter() - start)
                assert report.ok, report.first_bad
    chain, whole = statistics.median(before), statistics.median(after)
    print(f"archive: {url if args.store else 'riskshape demo (seed 7)'}; rows: {rows}")
    print(f"load average: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    print(f"chain only (verify before the commitments): median {chain * 1000:.1f} ms of {args.repeats}")
    print(f"whole verify (chain + commitments + keys):  median {whole * 1000:.1f} ms of {args.repeats}")
    print(f"ratio whole / chain only: {whole / chain:.2f}")


if __name__ == "__main__":
    main()
