"""A child process for the whole-run tests: archives a run and kills itself (SIGKILL, as ``kill -9``)
when the archive's writes reach a named fault point.

Usage: ``python -m tests.store.run_killer URL PRICES_PARQUET CONFIG_JSON POINT``. Exits 0 only if the
point was never reached (the test then fails: the point is misnamed).
"""

from __future__ import annotations

import json
import os
import signal
import sys

import pandas as pd

from riskshape import Config, monitor
from riskshape.archive import archive_run
from riskshape.store import open_store
from riskshape.store.database import set_fault_hook


def main(url: str, prices_path: str, config_path: str, point: str) -> None:
    prices = pd.read_parquet(prices_path)
    with open(config_path, encoding="utf-8") as handle:
        config = Config.from_mapping(json.load(handle), where=config_path)
    result = monitor(prices, config)
    store = open_store(url)

    def die_at(name: str) -> None:
        if name == point:
            os.kill(os.getpid(), signal.SIGKILL)

    set_fault_hook(die_at)
    archive_run(store, "Fund North", result)


if __name__ == "__main__":
    main(*sys.argv[1:5])
