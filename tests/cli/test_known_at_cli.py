"""``--as-known-at`` on the CLI: the output captured before a correction, given again bit for bit after it.

The reference is the command's own earlier output (DESIGN.md, "The daily loop": reads answer "as
known at T" on request); the current output must have moved, so the comparison can fail.
"""

from __future__ import annotations

from datetime import datetime, timezone

import pandas as pd
import pytest

from riskshape.store import open_store
from tests.kit.cli import run_cli
from tests.kit.corrected import archive_portfolio, correct_day, corrected_prices, rules_config


def test_alerts_list_show_export_as_known_before_a_correction(tmp_path, capsys: pytest.CaptureFixture[str]) -> None:
    url = f"sqlite:///{tmp_path / 'archive.sqlite'}"
    prices = corrected_prices()
    config = rules_config(prices)
    with open_store(url) as store:
        alert = archive_portfolio(store, prices, config)[0]
        store.append_review(alert.id, "acknowledge", "first-owner")
    commands = {
        "list": ["alerts", "list", "--store", url],
        "show": ["alerts", "show", str(alert.id), "--store", url],
        "export": ["alerts", "export", "--format", "csv", "--store", url],
        "reviews": ["alerts", "export", "--format", "jsonl", "--what", "reviews", "--store", url],
    }
    then = {name: run_cli(capsys, *argv)[1] for name, argv in commands.items()}
    moment = datetime.now(timezone.utc).isoformat()
    with open_store(url) as store:
        correct_day(store, prices, config, pd.Timestamp(alert.window_end), [1.3, 0.8, 1.1, 0.7, 1.2])
        store.append_review(alert.id, "escalate", "second-owner", "after the correction")
    for name, argv in commands.items():
        status, out, err = run_cli(capsys, *argv, "--as-known-at", moment)
        assert status in (None, 0), err
        shown = out.replace(f"as known at {moment} (later alerts, reviews and corrections left out)", "current")
        assert shown.replace(moment, "current") == then[name], name
        assert run_cli(capsys, *argv)[1] != then[name], f"{name} did not change: the comparison cannot fail"


@pytest.mark.parametrize("command", [["alerts", "list"], ["alerts", "show", "1"], ["report", "--out", "r.html"]])
def test_a_bad_moment_is_one_line_naming_the_option_and_the_format(
    tmp_path, capsys: pytest.CaptureFixture[str], command: list[str]
) -> None:
    url = f"sqlite:///{tmp_path / 'archive.sqlite'}"
    open_store(url).close()
    status, _, err = run_cli(capsys, *command, "--store", url, "--as-known-at", "2031-01-07 10:00")
    assert status == 2
    assert err.strip().count("\n") == 0 and "--as-known-at" in err and "ISO 8601 with a timezone" in err, err
