"""Crash and concurrency figures: many kill -9s inside the archive's writes, and eight writers at once.

    python benchmarks/reliability.py            # 20 runs, 15 ingests, 15 corrections, 15 reviews killed per backend
    python benchmarks/reliability.py --runs 4 --ingests 2 --corrections 2 --reviews 2 --rounds 1   # a quick look
    python benchmarks/reliability.py --backends sqlite
    python benchmarks/reliability.py --every-point --rounds 0   # each operation killed at every write event once

1. **Kills.** For each backend (SQLite file; PostgreSQL at 127.0.0.1:5432, a fresh schema per archive),
   ``riskshape run --store`` (18 fictional assets, 60 days, windows of 20, H0 and H1), a service ingest
   of the same prices on a real uvicorn process, a service correction of three archived prices
   (``correction=true``, after an uninterrupted ingest of the 60 days: the revisions, the superseded
   windows' new versions, the superseded and newly raised alerts and the day state, one transaction;
   ``tests.kit.kill_trials.revised_prices``), and ``riskshape alerts review`` (an escalation) are
   each killed at write events drawn uniformly (seeded) from those of an uninterrupted reference run
   (:mod:`tests.kit.fault_point`: before and after each INSERT/UPDATE/DELETE and before each COMMIT of
   a transaction that wrote; the child sends itself SIGKILL there, and its log says where, so every
   counted kill landed inside an open write transaction). After each kill: rows lost from what the
   child had committed, rows kept beyond it, ``verify``; then the operation is redone uninterrupted and
   the archive compared with the reference's (apart from time stamps, the hashes over them and ids):
   rows twice, rows missing (by table). Trials are in ``tests/kit/kill_trials.py``. The children are
   forked from this warm process (:class:`tests.kit.crash.Forked`: the fault point installed, then
   ``riskshape.cli.main(args)``, the same code from there on as ``python -m tests.kit.fault_point``,
   which the tests use) so that many trials fit in the time; a kill point may repeat.
2. **Eight writers at once** (forked processes released by one barrier, ``tests/kit/writers.py``),
   ``--rounds`` times on one archive per backend: 8 runs of different portfolios, 8 runs of one; 8
   ingests of different portfolios, 8 of one; 8 reviews of different alerts, 8 of one alert. A writer
   sees no lock error; counts are exact (each window, diagram, alert and price once; one acknowledgement
   of the shared alert, the others refused by the review workflow); the chain verifies.

Prints a table per section, the command and ``uptime`` before and after. Counts, not speed.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from functools import partial
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # the test kits: the fault point, the trials, the writers

import uvicorn  # noqa: E402, F401

import riskshape.cli  # noqa: E402, F401  (warm: each trial's children are forked from this process)
import riskshape_service  # noqa: E402, F401
from riskshape import Config, monitor  # noqa: E402
from riskshape.alerts import evaluate_rules  # noqa: E402
from riskshape.demo.scenario import generate_scenario  # noqa: E402
from riskshape.store import Store, open_store, verify_chain  # noqa: E402
from tests.kit.archive import make_alerts, manifest, walk_prices  # noqa: E402
from tests.kit.crash import archive_view, post_prices, read_log, run_cli, start_server  # noqa: E402
from tests.kit.kill_trials import Trial, ingested, kill_cli, kill_ingest, revised_prices  # noqa: E402
from tests.kit.postgres import postgres_unreachable  # noqa: E402
from tests.kit.service import csv_body, write_config  # noqa: E402
from tests.kit.writers import at_once, ingest_work, review_work, run_work  # noqa: E402

WRITERS = 8


@contextmanager
def archive_maker(backend: str, folder: Path) -> Iterator[Callable[[], str]]:
    """New empty archives (schema created) of one backend; PostgreSQL schemas dropped at the end."""
    import psycopg

    from tests.kit.postgres import PG_CONNINFO, PG_URL

    schemas: list[str] = []
    made = [0]

    def make() -> str:
        made[0] += 1
        if backend == "sqlite":
            url = f"sqlite:///{folder / f'archive{made[0]}.sqlite'}"
        else:
            schema = f"rs_bench_{time.time_ns() % 10**12}_{made[0]}"
            with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
                conn.execute(f'CREATE SCHEMA "{schema}"')
            schemas.append(schema)
            url = f"{PG_URL}?options=-csearch_path%3D{schema}"
        open_store(url).close()
        return url

    try:
        yield make
    finally:
        if schemas:
            with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
                for schema in schemas:
                    conn.execute(f'DROP SCHEMA IF EXISTS "{schema}" CASCADE')


def _points(total: int, n: int, rng: np.random.Generator) -> list[int]:
    if n < 0:  # --every-point: each write event once, in order
        return list(range(1, total + 1))
    return [int(k) for k in rng.integers(1, total + 1, size=n)]


def kill_section(backend: str, counts: dict[str, int], folder: Path, seed: int) -> list[Trial]:
    prices = generate_scenario(seed=5, n_days=60, assets_per_sector=3).prices
    body = csv_body(prices)
    (folder / "prices.csv").write_bytes(body)
    config = write_config(folder)
    rng = np.random.default_rng(seed)
    trials: list[Trial] = []
    with archive_maker(backend, folder) as make:

        def run_args(url: str) -> list[str]:
            return ["run", "--prices", str(folder / "prices.csv"), "--config", str(config)] + [
                "--out",
                str(folder / "out"),
                "--store",
                url,
            ]

        if counts["run"]:
            reference = make()
            assert run_cli(folder / "run-ref.log", 0, run_args(reference), forked=True).returncode == 0
            expected, total = archive_view(reference), read_log(folder / "run-ref.log").events
            for kill_at in _points(total, counts["run"], rng):
                url = make()
                trials.append(kill_cli("run", url, run_args(url), kill_at, folder, expected, forked=True))
                print(f"  {backend} run    killed at {kill_at:3d}/{total}: {_brief(trials[-1])}", flush=True)

        def fed() -> tuple[str, str]:
            url = make()
            with open_store(url) as store:
                store.create_portfolio("Fund North")
                return url, store.create_api_key("feed", "ingest").token

        if counts["ingest"]:
            reference, token = fed()
            server = start_server(
                reference, config, folder / "ingest-ref.log", 0, folder / "ingest-ref.out", forked=True
            )
            try:
                answered = post_prices(server, "Fund North", body, token)
            finally:
                server.stop()
            assert answered is not None and answered.status_code == 200, answered
            expected, total = archive_view(reference), read_log(folder / "ingest-ref.log").events
            for kill_at in _points(total, counts["ingest"], rng):
                url, token = fed()
                trials.append(
                    kill_ingest(url, config, body, token, "Fund North", kill_at, folder, expected, forked=True)
                )
                print(f"  {backend} ingest killed at {kill_at:3d}/{total}: {_brief(trials[-1])}", flush=True)

        if counts["correction"]:
            fixes = csv_body(revised_prices(prices))
            reference = make()
            token = ingested(reference, config, prices)
            server = start_server(
                reference, config, folder / "correction-ref.log", 0, folder / "correction-ref.out", forked=True
            )
            try:
                answered = post_prices(server, "Fund North", fixes, token, correction=True)
            finally:
                server.stop()
            assert answered is not None and answered.status_code == 200, answered
            assert answered.json()["corrections"] > 0, answered.text
            expected, total = archive_view(reference), read_log(folder / "correction-ref.log").events
            for kill_at in _points(total, counts["correction"], rng):
                url = make()
                token = ingested(url, config, prices)
                trials.append(
                    kill_ingest(
                        url, config, fixes, token, "Fund North", kill_at, folder, expected, forked=True, correction=True
                    )
                )
                print(f"  {backend} correction killed at {kill_at:3d}/{total}: {_brief(trials[-1])}", flush=True)

        def with_alerts() -> tuple[str, list[str]]:
            url = make()
            rng_alerts = np.random.default_rng(3)
            with open_store(url) as store:
                store.create_portfolio("Fund North")
                run = store.create_run("Fund North", manifest(), walk_prices(rng_alerts))
                alert = store.append_alerts(make_alerts(rng_alerts, 4), run.id).added[2]
            args = ["alerts", "review", str(alert.id), "--store", url, "--action", "escalate"]
            return url, args + ["--reviewer", "desk one", "--comment", "moves with the index"]

        if counts["review"]:
            reference, args = with_alerts()
            assert run_cli(folder / "review-ref.log", 0, args, forked=True).returncode == 0
            expected, total = archive_view(reference), read_log(folder / "review-ref.log").events
            for kill_at in _points(total, counts["review"], rng):
                url, args = with_alerts()
                trials.append(kill_cli("review", url, args, kill_at, folder, expected, forked=True))
                print(f"  {backend} review killed at {kill_at:3d}/{total}: {_brief(trials[-1])}", flush=True)
    return trials


def _brief(trial: Trial) -> str:
    return (
        f"{trial.where}, lost {trial.lost}, kept {trial.kept}, verify {'ok' if trial.verified else 'FAILED'}, "
        f"redo {'equal' if trial.equal else f'differs (twice {trial.duplicated}, missing {trial.missing})'}"
    )


def kill_table(backend: str, trials: list[Trial]) -> list[str]:
    rows = []
    for operation in ("run", "ingest", "correction", "review"):
        mine = [t for t in trials if t.operation == operation]
        if not mine:
            continue
        inside = [t for t in mine if t.inside_writes]
        missing_tables = sorted({table for t in inside for table in t.missing})
        rows.append(
            f"| {backend} | {operation} | {len(mine)} | {len(inside)} | "
            f"{sum(t.lost for t in inside)} | {sum(t.kept for t in inside)} | "
            f"{sum(t.verified for t in inside)} of {len(inside)} | {sum(t.duplicated for t in inside)} | "
            f"{sum(t.equal for t in inside)} of {len(inside)}"
            + (f" (the others miss rows of: {', '.join(missing_tables)})" if missing_tables else "")
            + " |"
        )
    return rows


def _counts(store: Store, portfolio: str) -> tuple[int, int, int]:
    import sqlalchemy as sa

    where = "WHERE portfolio_id = (SELECT id FROM portfolios WHERE name = :p)"
    with store.engine.connect() as connection:
        return tuple(  # type: ignore[return-value]
            int(connection.execute(sa.text(f"SELECT count(*) FROM {t} {where}"), {"p": portfolio}).scalar_one())
            for t in ("features", "diagrams", "alerts")
        )


def concurrency_section(backend: str, rounds: int, folder: Path) -> list[str]:
    prices = generate_scenario(seed=5, n_days=45, assets_per_sector=3).prices
    config = Config.from_toml(write_config(folder))
    result = monitor(prices, config)
    firings = len(evaluate_rules(result.features, config.alerts.rules))
    whole = (len(result.window_ends), len(result.window_ends) * (config.maxdim + 1), firings)
    tally = {name: [0, 0, 0] for name in ("runs", "ingests", "reviews")}  # operations, lock errors, exact rounds
    with archive_maker(backend, folder) as make:
        url = make()
        with open_store(url) as store:
            for r in range(rounds):
                names = [f"Fund {r}-{n}" for n in range(WRITERS)]
                apart = at_once(url, [partial(run_work, result, name) for name in names])
                shared = at_once(url, [partial(run_work, result, f"Fund {r}-shared") for _ in range(WRITERS)])
                exact = all(_counts(store, name) == whole for name in [*names, f"Fund {r}-shared"])
                exact &= [o.detail for o in apart] == [firings] * WRITERS
                exact &= sum(o.detail for o in shared if o.status == "ok") == firings
                _tally(tally["runs"], apart + shared, exact)

                feeds = [f"Feed {r}-{n}" for n in range(WRITERS)] + [f"Feed {r}-shared"]
                for name in feeds:
                    store.create_portfolio(name)
                apart = at_once(url, [partial(ingest_work, prices, config, name) for name in feeds[:WRITERS]])
                shared = at_once(url, [partial(ingest_work, prices, config, feeds[-1]) for _ in range(WRITERS)])
                exact = all(_counts(store, name) == whole for name in feeds)
                added = [o.detail for o in shared if o.status == "ok"]
                exact &= [o.detail for o in apart] == [(prices.size, whole[0], firings)] * WRITERS
                exact &= [sum(a[k] for a in added) for k in range(3)] == [prices.size, whole[0], firings]
                _tally(tally["ingests"], apart + shared, exact)

                ids = [a.id for a in store.list_alerts(limit=None).items if a.portfolio in names][: WRITERS + 1]
                apart = at_once(url, [partial(review_work, ids[n], f"reviewer {n}") for n in range(WRITERS)])
                shared = at_once(url, [partial(review_work, ids[-1], f"reviewer {n}") for n in range(WRITERS)])
                exact = all(o.status == "ok" for o in apart) and len(store.get_alert(ids[-1]).reviews) == 1
                exact &= sum(o.status == "ok" for o in shared) == 1
                _tally(tally["reviews"], apart + shared, exact)
            report = verify_chain(store)
    return [
        f"| {backend} | {WRITERS} | {name} | {ops} | {locks} | {good} of {rounds} | "
        f"{'passes' if report.ok else 'FAILS'} ({report.head.count} records) |"
        for name, (ops, locks, good) in tally.items()
    ]


def _tally(row: list[int], outcomes: list, exact: bool) -> None:
    row[0] += len(outcomes)
    row[1] += sum(o.lock_error or o.status == "crash" for o in outcomes)
    row[2] += int(exact)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--backends", default="sqlite,postgresql")
    parser.add_argument("--runs", type=int, default=20, help="runs killed per backend")
    parser.add_argument("--ingests", type=int, default=15, help="ingests killed per backend")
    parser.add_argument("--corrections", type=int, default=15, help="corrections killed per backend")
    parser.add_argument("--reviews", type=int, default=15, help="reviews killed per backend")
    parser.add_argument("--rounds", type=int, default=3, help="rounds of eight writers at once per backend")
    parser.add_argument("--seed", type=int, default=2031)
    parser.add_argument(
        "--every-point",
        action="store_true",
        help="kill each operation once at every one of its write events (instead of the drawn counts)",
    )
    args = parser.parse_args()
    backends = [b.strip() for b in args.backends.split(",") if b.strip()]
    if "postgresql" in backends and (reason := postgres_unreachable()):
        print(f"PostgreSQL left out: {reason}")
        backends.remove("postgresql")
    print("command: python benchmarks/reliability.py " + " ".join(sys.argv[1:]))
    print("load before:", subprocess.run(["uptime"], capture_output=True, text=True).stdout.strip())
    started = time.monotonic()
    counts = {"run": args.runs, "ingest": args.ingests, "correction": args.corrections, "review": args.reviews}
    if args.every_point:  # an operation given 0 stays out
        counts = {operation: -1 if n else 0 for operation, n in counts.items()}
    kills, writers = [], []
    for backend in backends:
        with tempfile.TemporaryDirectory(prefix="rs-reliability-") as folder:
            trials = kill_section(backend, counts, Path(folder), args.seed)
            kills += kill_table(backend, trials)
            inside = sum(t.inside_writes for t in trials)
            print(f"{backend}: {inside} of {len(trials)} kills landed inside the archive's writes", flush=True)
        if args.rounds:
            with tempfile.TemporaryDirectory(prefix="rs-writers-") as folder:
                writers += concurrency_section(backend, args.rounds, Path(folder))
    print()
    print(
        "| backend | operation | kills | inside writes | committed rows lost | rows kept beyond the commit "
        "| verify passes | rows twice after the redo | redo equals an uninterrupted run |"
    )
    print("|---|---|---|---|---|---|---|---|---|")
    print("\n".join(kills))
    print()
    print(
        "| backend | writers at once | operation | operations | lock errors reaching a writer | counts exact | chain |"
    )
    print("|---|---|---|---|---|---|---|")
    print("\n".join(writers))
    print()
    print(f"elapsed {time.monotonic() - started:.0f} s")
    print("load after:", subprocess.run(["uptime"], capture_output=True, text=True).stdout.strip())


if __name__ == "__main__":
    main()
