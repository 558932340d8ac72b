"""The ``audit`` and ``alerts`` commands (on SQLite; the store under them is tested on both backends)."""

from __future__ import annotations

import csv
import dataclasses
import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa

from riskshape.caution import CAUTION
from riskshape.outputs.export import EXPORT_COLUMNS, REVIEW_COLUMNS, neutralise_cell
from riskshape.store import chain_head, open_store
from tests.kit.archive import around_triggers, make_alerts, manifest, walk_prices
from tests.kit.cli import run_cli


@pytest.fixture
def archive(tmp_path: Path, rng: np.random.Generator) -> str:
    """A SQLite archive with 4 alerts (one on a portfolio whose name looks like a formula) and a review.

    Ledger: per portfolio, the commitments of the portfolio and of its run, then its 2 alerts (seq 1-8);
    the review is seq 9.
    """
    url = f"sqlite:///{tmp_path / 'cli.sqlite'}"
    with open_store(url) as store:
        for name in ("Fund North", "=HYPERLINK(1)"):
            store.create_portfolio(name)
            run = store.create_run(name, manifest(), walk_prices(rng))
            store.append_alerts(make_alerts(rng, 2, portfolio=name, start="2030-03-01"), run.id)
        store.append_review(1, "escalate", "@Reviewer", "-looks real")
    return url


def test_verify_and_head(archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    status, out, _ = run_cli(capsys, "audit", "verify", "--store", archive)
    assert status in (None, 0) and out.splitlines()[0] == CAUTION and "ok: 9 records verified" in out
    status, out, _ = run_cli(capsys, "audit", "head", "--store", archive)
    head = out.splitlines()[-1]
    assert head.startswith("9:") and len(head) == 2 + 64
    status, out, _ = run_cli(capsys, "audit", "verify", "--store", archive, "--expect-head", head)
    assert status in (None, 0) and "matches the expected head" in out


def test_verify_fails_naming_the_first_bad_record(archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    with open_store(archive) as store:
        kept = str(chain_head(store))
        with around_triggers(store) as connection:
            connection.execute(sa.text("UPDATE alerts SET rule = 'rule_b' WHERE id = 2"))
    status, out, _ = run_cli(capsys, "audit", "verify", "--store", archive)
    assert status == 1 and out.splitlines()[0] == CAUTION
    assert "first bad record: seq 4 (alerts id 2)" in out
    with open_store(archive) as store, around_triggers(store) as connection:
        connection.execute(sa.text("UPDATE alerts SET rule = 'rule_a' WHERE id = 2"))
        connection.execute(sa.text("DELETE FROM reviews"))
        connection.execute(sa.text("DELETE FROM ledger WHERE seq = 9"))
    assert run_cli(capsys, "audit", "verify", "--store", archive)[0] in (None, 0)  # the cut tail is invisible alone
    status, out, _ = run_cli(capsys, "audit", "verify", "--store", archive, "--expect-head", kept)
    assert status == 1 and "seq 9" in out and "tail cut" in out


def test_verify_names_a_covered_row_and_seal_covers_an_older_archive(
    archive: str, capsys: pytest.CaptureFixture[str]
) -> None:
    status, out, _ = run_cli(capsys, "audit", "verify", "--store", archive)
    assert "covered by them and checked: runs, prices, features, diagrams, portfolios, API keys" in out
    with open_store(archive) as store, around_triggers(store) as connection:
        old = connection.execute(sa.text("SELECT price FROM prices WHERE id = 7")).scalar_one()
        connection.execute(sa.text("UPDATE prices SET price = :p WHERE id = 7"), {"p": old + 1.0})
    status, out, _ = run_cli(capsys, "audit", "verify", "--store", archive)
    assert status == 1 and "first bad record: seq 2 (prices id 7): portfolio 'Fund North'" in out
    assert "run 1's commitment (seq 2)" in out and "the ledger's 9 records verified" in out
    with open_store(archive) as store, around_triggers(store) as connection:
        connection.execute(sa.text("UPDATE prices SET price = :p WHERE id = 7"), {"p": old})
        # a portfolio archived by a riskshape before commitments (no commitment of its own)
        connection.execute(sa.text("INSERT INTO portfolios (name, created_at) VALUES ('Fund Old', '2030-01-01')"))
    status, out, _ = run_cli(capsys, "audit", "verify", "--store", archive)
    assert status == 1 and "'Fund Old' is not covered by any commitment" in out
    status, out, _ = run_cli(capsys, "audit", "seal", "--store", archive)
    assert status in (None, 0) and out.splitlines()[0] == CAUTION and "1 commitment(s) appended; head 10:" in out
    status, out, _ = run_cli(capsys, "audit", "verify", "--store", archive)
    assert status in (None, 0) and "ok: 10 records verified" in out


def test_user_errors_are_one_line_and_status_2(
    archive: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    status, _, err = run_cli(capsys, "audit", "verify", "--store", f"sqlite:///{tmp_path / 'no' / 'x.sqlite'}")
    assert status == 2 and err.startswith("riskshape: error:") and len(err.strip().splitlines()) == 1
    status, _, err = run_cli(capsys, "audit", "verify", "--store", archive, "--expect-head", "12:xyz")
    assert status == 2 and "COUNT:HASH" in err
    status, _, err = run_cli(capsys, "alerts", "list", "--store", f"sqlite:///{tmp_path / 'typo.sqlite'}")
    assert status == 2 and "no archive at" in err and not (tmp_path / "typo.sqlite").exists()


def test_an_unknown_alert_is_a_user_error(archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    status, _, err = run_cli(capsys, "alerts", "show", "77", "--store", archive)
    assert status == 2 and "alert 77 is not in the archive" in err


def test_list_show_and_review(archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    status, out, _ = run_cli(capsys, "alerts", "list", "--store", archive, "--portfolio", "Fund North")
    lines = out.splitlines()
    assert lines[0] == CAUTION and lines[-1].startswith("1-2 of 2 alert(s); by status: 1 open, ")
    _, out, _ = run_cli(capsys, "alerts", "list", "--store", archive, "--status", "open")
    assert out.splitlines()[-1].startswith("1-3 of 3 alert(s)")
    _, out, _ = run_cli(capsys, "alerts", "list", "--store", archive, "--status", "escalated,dismissed")
    rows = out.splitlines()[2:-1]
    assert len(rows) == 1 and rows[0].split()[0] == "1" and "escalated" in rows[0] and "@Reviewer" in rows[0]
    status, _, err = run_cli(
        capsys, "alerts", "review", "3", "--store", archive, "--action", "dismiss", "--reviewer", "Ana"
    )
    assert status == 2 and "comment" in err and len(err.strip().splitlines()) == 1
    _, out, _ = run_cli(
        capsys,
        "alerts",
        "review",
        "3",
        "--store",
        archive,
        "--action",
        "dismiss",
        "--reviewer",
        "Ana",
        "--comment",
        "noise",
    )
    assert "review 2 of alert 3 recorded (dismiss); status dismissed" in out
    _, out, _ = run_cli(capsys, "alerts", "list", "--store", archive, "--status", "dismissed", "--status", "escalated")
    assert out.splitlines()[-1].startswith("1-2 of 2 alert(s)")
    _, out, _ = run_cli(capsys, "alerts", "show", "1", "--store", archive)
    assert out.splitlines()[0] == CAUTION and "escalate by @Reviewer: -looks real" in out
    assert "entry_hash" in out and "inputs_hash" in out and "status           escalated" in out
    status, _, err = run_cli(
        capsys, "alerts", "review", "1", "--store", archive, "--action", "close", "--reviewer", "@Reviewer"
    )
    assert status == 2 and "four eyes" in err
    _, out, _ = run_cli(capsys, "alerts", "review", "1", "--store", archive, "--action", "close", "--reviewer", "Bo")
    assert "status closed" in out
    status, _, err = run_cli(
        capsys, "alerts", "review", "3", "--store", archive, "--action", "approve", "--reviewer", "Ana"
    )
    assert status == 2 and "approve" in err


def test_period_names_and_aliases(archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    _, out, _ = run_cli(capsys, "alerts", "list", "--store", archive, "--start", "2030-03-04")
    assert out.splitlines()[-1].startswith("1-2 of 2 alert(s)")
    status, out, err = run_cli(capsys, "alerts", "list", "--store", archive, "--since", "2030-03-04")
    assert out.splitlines()[-1].startswith("1-2 of 2 alert(s)") and "--since is deprecated" in err
    status, _, err = run_cli(
        capsys, "alerts", "list", "--store", archive, "--start", "2030-03-05", "--end", "2030-03-01"
    )
    assert status == 2 and "start 2030-03-05 is after end 2030-03-01" in err
    status, _, err = run_cli(
        capsys, "alerts", "list", "--store", archive, "--start", "2030-03-05", "--since", "2030-03-01"
    )
    assert status == 2 and "give only start" in err


def test_sign_off_commands(archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    sign = ("audit", "sign-off", "--store", archive, "--start", "2030-03-01", "--end", "2030-03-31", "--signer", "Cy")
    status, _, err = run_cli(capsys, *sign, "--portfolio", "Fund North")
    assert status == 2 and "still open or escalated" in err and "1 (Fund North" in err and "2 (Fund North" in err
    run_cli(capsys, "alerts", "review", "1", "--store", archive, "--action", "close", "--reviewer", "Bo")
    run_cli(capsys, "alerts", "review", "2", "--store", archive, "--action", "acknowledge", "--reviewer", "Bo")
    status, out, _ = run_cli(capsys, *sign, "--portfolio", "Fund North")
    assert status in (None, 0) and "signed off by Cy (Fund North)" in out
    assert "0 open, 1 acknowledged, 0 escalated, 0 dismissed, 1 closed" in out
    _, out, _ = run_cli(capsys, "audit", "sign-offs", "--store", archive)
    assert "2030-03-01 to 2030-03-31  Fund North  by Cy" in out and out.splitlines()[-1] == "1 sign-off(s)"
    assert run_cli(capsys, "audit", "verify", "--store", archive)[0] in (None, 0)


def test_neutralise_cell_follows_owasp_csv_injection_guidance() -> None:
    # OWASP "CSV Injection": cells beginning with =, +, -, @, tab (0x09) or carriage return (0x0D) are
    # prefixed with a single quote so a spreadsheet shows them as text.
    for risky in ("=1+1", "+1", "-1", "@SUM(A1)", "\tx", "\rx"):
        assert neutralise_cell(risky) == "'" + risky
    for safe in ("Fund North", "1=1", "", "a-b"):
        assert neutralise_cell(safe) == safe


def test_export_csv_reads_with_no_options(archive: str, capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    out_file = tmp_path / "alerts.csv"
    status, out, _ = run_cli(capsys, "alerts", "export", "--store", archive, "--format", "csv", "--out", str(out_file))
    assert status in (None, 0) and CAUTION in out
    # pandas.read_csv and csv.DictReader with no options: the header row is the first row.
    table = pd.read_csv(out_file)
    assert tuple(table.columns) == EXPORT_COLUMNS and len(table) == 4
    assert (table["caution"] == CAUTION).all()
    with out_file.open(newline="", encoding="utf-8") as handle:
        records = list(csv.DictReader(handle))
    assert [r["id"] for r in records] == ["1", "3", "2", "4"]  # by window end, then id
    formula = [r for r in records if "HYPERLINK" in r["portfolio"]]
    assert {r["portfolio"] for r in formula} == {"'=HYPERLINK(1)"}
    assert records[0]["last_reviewer"] == "'@Reviewer"  # neutralised like every text cell
    with open_store(archive) as store:
        first = store.get_alert(1).alert
    assert records[0]["entry_hash"] == first.entry_hash and float(records[0]["value"]) == first.value
    assert table.loc[0, "value"] == first.value  # exact: the shortest round-trip text
    assert records[0]["reviews"] == "1" and records[0]["last_action"] == "escalate"
    assert records[0]["status"] == "escalated" and records[1]["status"] == "open"
    status, out, _ = run_cli(capsys, "alerts", "export", "--store", archive, "--format", "csv", "--start", "2030-03-04")
    assert [r["id"] for r in csv.DictReader(io.StringIO(out))] == ["2", "4"]
    status, out, err = run_cli(
        capsys, "alerts", "export", "--store", archive, "--format", "csv", "--from", "2030-03-04"
    )
    assert [r["id"] for r in csv.DictReader(io.StringIO(out))] == ["2", "4"] and "--from is deprecated" in err


def test_export_reviews_one_row_each(archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    run_cli(
        capsys, "alerts", "review", "1", "--store", archive, "--action", "close", "--reviewer", "=cmd|' /C calc'!A0"
    )
    status, out, _ = run_cli(capsys, "alerts", "export", "--store", archive, "--format", "csv", "--what", "reviews")
    table = pd.read_csv(io.StringIO(out))
    assert tuple(table.columns) == REVIEW_COLUMNS
    assert list(table["action"]) == ["escalate", "close"] and list(table["status_after"]) == ["escalated", "closed"]
    assert list(table["reviewer"]) == ["'@Reviewer", "'=cmd|' /C calc'!A0"]
    assert list(table["comment"].fillna("")) == ["'-looks real", ""]
    status, out, _ = run_cli(capsys, "alerts", "export", "--store", archive, "--format", "jsonl", "--what", "reviews")
    lines = [json.loads(line) for line in out.splitlines()]
    assert [x["reviewer"] for x in lines] == ["@Reviewer", "=cmd|' /C calc'!A0"]  # JSON keeps text as archived
    assert all(set(x) == set(REVIEW_COLUMNS) for x in lines)


def test_export_jsonl_keeps_values_exactly(archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    status, out, _ = run_cli(capsys, "alerts", "export", "--store", archive, "--format", "jsonl", "--end", "2030-03-01")
    lines = [json.loads(line) for line in out.splitlines()]
    with open_store(archive) as store:
        archived = {a.id: a for a in store.list_alerts(limit=None).items}
    assert [row["id"] for row in lines] == [1, 3]  # every line one alert: no caution line
    wanted = (set(EXPORT_COLUMNS) - {"explanation_json"}) | {"explanation"}
    for row in lines:
        alert = archived[row["id"]]
        assert row["caution"] == CAUTION
        assert row["value"] == alert.value and row["window_end"] == alert.window_end.isoformat()
        assert row["portfolio"] == alert.portfolio and row["prev_hash"] == alert.prev_hash
        assert set(row) == wanted and set(dataclasses.asdict(alert)) <= set(row)


def test_reproduce_command(tmp_path: Path, computed, capsys: pytest.CaptureFixture[str]) -> None:
    from riskshape.archive import archive_run

    url = f"sqlite:///{tmp_path / 'runs.sqlite'}"
    with open_store(url) as store:
        alert = archive_run(store, "Fund Scenario", computed).alerts.added[-1]
    status, out, _ = run_cli(capsys, "audit", "reproduce", str(alert.id), "--store", url)
    assert status in (None, 0) and out.splitlines()[0] == CAUTION
    assert f"alert {alert.id} reproduced (bit-identical)" in out and "FAIL" not in out
    with open_store(url) as store, around_triggers(store) as connection:
        connection.execute(sa.text("UPDATE alerts SET threshold = threshold * 2 WHERE id = :id"), {"id": alert.id})
    status, out, _ = run_cli(capsys, "audit", "reproduce", str(alert.id), "--store", url)
    assert status == 1 and "FAIL threshold" in out and f"alert {alert.id} NOT reproduced: threshold" in out
