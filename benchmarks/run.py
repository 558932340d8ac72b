"""riskshape benchmarks: one command, ratios measured side by side in one run.

    python benchmarks/run.py            # full run (about 10 minutes on 2 cores)
    python benchmarks/run.py --quick    # scaled down (about 2 minutes); says so in its output
    python benchmarks/run.py --only large,update

Prints one table per section and writes them, with the machine's description, to
``benchmarks/results/`` (JSON and text; the folder is not committed).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import subprocess
import sys
import time
from datetime import datetime, timezone
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

import pandas as pd  # noqa: E402

from benchmarks import cases  # noqa: E402

SECTIONS = {
    "cost": ("per-window cost", cases.per_window_cost),
    "naive": ("naive loop against riskshape", cases.naive_loop_vs_riskshape),
    "h0": ("H0 only against ripser maxdim 0", cases.h0_vs_ripser),
    "update": ("one-day update", cases.one_day_update),
    "executors": ("executors (demo scenario)", None),
    "distances": ("distance solvers", cases.distance_solvers),
    "floor": ("serial monitor against the persistence alone, by stage", cases.engine_floor),
    "large": ("large run and peak memory", None),
}


def _child(argv: list[str]) -> None:
    """Entry point of the fresh processes some sections run in; prints one JSON line."""
    kind, *rest = argv
    if kind == "large":
        n_windows, n_assets, window = (int(x) for x in rest)
        out = cases.large_run(n_windows, n_assets, window)
    else:
        variant, quick = rest
        out = cases.executor_run(variant, quick == "1")
    print(json.dumps(out))


def _in_fresh_process(*args: str) -> dict[str, float]:
    done = subprocess.run(
        [sys.executable, str(Path(__file__).resolve()), "--child", *args],
        capture_output=True,
        text=True,
        check=False,
        cwd=ROOT,
    )
    if done.returncode != 0:
        raise RuntimeError(f"benchmark child {args} failed:\n{done.stderr[-3000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def executors_section(quick: bool) -> list[cases.Row]:
    rows = []
    for variant, label in [
        ("serial", "serial"),
        ("pool", "process pool (default: libraries imported before fork)"),
        ("pool-no-preload", "process pool, each worker importing the libraries"),
    ]:
        rows.append(cases.Row(label, _in_fresh_process("executor", variant, "1" if quick else "0")))
    base = rows[0].values["wall s"]
    for row in rows:
        row.values["speed-up (wall)"] = base / row.values["wall s"]
    return rows


def large_section(quick: bool) -> list[cases.Row]:
    n_windows = 400 if quick else 5000
    values = _in_fresh_process("large", str(n_windows), "500", "250")
    label = f"{n_windows} windows x 500 assets, window 250, H0+H1"
    return [cases.Row(label + (" (QUICK: scaled down from 5,000 windows)" if quick else ""), values)]


def _machine() -> dict[str, object]:
    import numpy

    import riskshape
    from riskshape.compute.executors import available_cores
    from riskshape.compute.persistence import resolve_backend

    return {
        "date": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "cores": available_cores(),
        "load average (1, 5, 15 min)": os.getloadavg(),
        "python": platform.python_version(),
        "numpy": numpy.__version__,
        "riskshape": riskshape.__version__,
        "rips backend": resolve_backend("auto"),
        "platform": platform.platform(),
    }


def _format(title: str, table: pd.DataFrame) -> str:
    with pd.option_context("display.width", 200, "display.max_columns", 20, "display.float_format", "{:,.3g}".format):
        return f"\n== {title} ==\n{table.to_string()}\n"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true", help="scaled-down sizes (the output says so)")
    parser.add_argument(
        "--only", default=",".join(SECTIONS), help=f"comma-separated sections of: {', '.join(SECTIONS)}"
    )
    parser.add_argument("--out", type=Path, default=ROOT / "benchmarks" / "results")
    parser.add_argument("--child", nargs="+", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        _child(args.child)
        return 0
    chosen = [name.strip() for name in args.only.split(",") if name.strip()]
    unknown = set(chosen) - set(SECTIONS)
    if unknown:
        parser.error(f"unknown section(s) {sorted(unknown)}; choose from {', '.join(SECTIONS)}")
    machine = _machine()
    machine["calibration ms at the start (ripser, fixed window, best of 5)"] = round(cases.calibration_ms(), 2)
    lines = [
        "riskshape benchmarks"
        + ("  [QUICK MODE: sizes scaled down, figures are not the reference ones]" if args.quick else "")
    ]
    lines += [f"  {key}: {value}" for key, value in machine.items()]
    print("\n".join(lines), flush=True)
    report: dict[str, object] = {"machine": machine, "quick": args.quick, "sections": {}}
    started = time.perf_counter()
    for name in chosen:
        title, fn = SECTIONS[name]
        section_start = time.perf_counter()
        if name == "executors":
            rows = executors_section(args.quick)
        elif name == "large":
            rows = large_section(args.quick)
        else:
            rows = fn(args.quick)
        table = cases.frame(rows)
        text = _format(f"{title}  ({time.perf_counter() - section_start:.0f} s)", table)
        print(text, flush=True)
        lines.append(text)
        report["sections"][name] = {"title": title, "rows": {row.case: row.values for row in rows}}  # type: ignore[index]
    machine["load average at the end"] = os.getloadavg()
    machine["calibration ms at the end"] = round(cases.calibration_ms(), 2)
    footer = (
        f"\ntotal {time.perf_counter() - started:.0f} s; load average at the end {machine['load average at the end']}; "
        f"calibration ms at the end {machine['calibration ms at the end']}"
    )
    print(footer)
    lines.append(footer)
    args.out.mkdir(parents=True, exist_ok=True)
    stamp = datetime.now(timezone.utc).strftime("%Y%m%d-%H%M%S") + ("-quick" if args.quick else "")
    (args.out / f"run-{stamp}.json").write_text(json.dumps(report, indent=2, default=float))
    (args.out / f"run-{stamp}.txt").write_text("\n".join(lines) + "\n")
    print(f"written: {args.out / f'run-{stamp}.txt'} and .json")
    return 0


if __name__ == "__main__":
    sys.exit(main())
