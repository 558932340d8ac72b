"""A writer process for the concurrency tests: appends alerts (and a review every fifth alert) one
transaction at a time, printing ``alert ID SEQ`` / ``review ID SEQ`` after each commit.

Usage: ``python -m tests.kit.archive_writer URL RUN_ID RULE COUNT [GO_FILE]``; with GO_FILE it prints
``ready`` and waits until that file exists before writing.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

from riskshape.store import open_store
from tests.kit.archive import make_alerts


def main(url: str, run_id: int, rule: str, count: int, go_file: str | None) -> None:
    rng = np.random.default_rng(abs(hash(rule)) % 2**32)
    store = open_store(url)
    batch = make_alerts(rng, count, rule=rule, start="2030-01-01")
    if go_file is not None:
        print("ready", flush=True)
        while not Path(go_file).exists():
            time.sleep(0.005)
    for n, alert in enumerate(batch, start=1):
        record = store.append_alerts([alert], run_id).added[0]
        print(f"alert {record.id} {record.seq}", flush=True)
        if n % 5 == 0:
            review = store.append_review(record.id, "acknowledge", f"{rule} reviewer")
            print(f"review {review.id} {review.seq}", flush=True)
        time.sleep(0.01)  # leave the other writer a gap (SQLite's busy handler retries with back-off)


if __name__ == "__main__":
    main(sys.argv[1], int(sys.argv[2]), sys.argv[3], int(sys.argv[4]), sys.argv[5] if len(sys.argv) > 5 else None)
