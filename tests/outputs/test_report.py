"""The review report: numbers match the archive, it is self-contained, and a real browser renders it."""

from __future__ import annotations

import shutil
import sqlite3
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from matplotlib.image import imread

from riskshape import CAUTION, Config, monitor
from riskshape.alerts.model import Alert
from riskshape.alerts.rules import evaluate_rules
from riskshape.cli import main
from riskshape.demo.scenario import generate_scenario
from riskshape.explain import explain_alert
from riskshape.outputs import palette
from riskshape.outputs.report import collect_review, render_html, write_report
from riskshape.store import RunManifest, Store, chain_head, open_store, verify_chain

RULES = [
    {
        "name": "h0-high",
        "summary": "h0_total_persistence",
        "kind": "quantile",
        "threshold": 0.9,
        "min_history": 10,
        "lookback": 40,
        "cooldown": 4,
    },
    {
        "name": "h1-high",
        "summary": "h1_landscape_l1",
        "kind": "quantile",
        "threshold": 0.9,
        "min_history": 10,
        "lookback": 40,
        "cooldown": 4,
        "severity": "critical",
    },
]
PERIOD = ("2031-05-01", "2032-04-30")
COMMENT = 'checked <b>by hand</b> & "fine"'


def record_run(store: Store, portfolio: str, result) -> tuple:
    """Archive a run through the store's public API: prices and manifest, features, alerts of its rules."""
    config = result.config
    store.ensure_portfolio(portfolio)
    manifest = RunManifest(
        config=config.to_mapping(),
        config_hash=config.hash(),
        input_hash=result.input_hash,
        package_version=result.package_version,
        source="test",
    )
    run = store.create_run(portfolio, manifest, result.prices)
    store.write_features(run.id, result.features)
    raised = pd.Timestamp("2033-01-03", tz="UTC").to_pydatetime()
    alerts = [
        Alert(
            portfolio, f, raised, manifest.config_hash, result.window_inputs_hash(f.window_end), result.package_version
        )
        for f in evaluate_rules(result.features, config.alerts.rules)
    ]
    return store.append_alerts(alerts, run.id).added


@pytest.fixture(scope="module")
def archive(tmp_path_factory: pytest.TempPathFactory):
    """A SQLite archive holding one run of a small fictional market, its alerts and one review."""
    folder = tmp_path_factory.mktemp("archive")
    url = f"sqlite:///{folder / 'archive.sqlite'}"
    scenario = generate_scenario(seed=5, n_days=400, assets_per_sector=4)
    config = Config(window=40, step=5, compute={"executor": "serial"}, alerts={"rules": RULES})
    result = monitor(scenario.prices, config)
    with open_store(url) as store:
        added = record_run(store, "fictional-book", result)
        inside = [a for a in added if PERIOD[0] <= str(a.window_end) <= PERIOD[1]]
        store.append_review(inside[0].id, "escalate", "reviewer one", COMMENT)
    return url, folder, result, added


class _Collector(HTMLParser):
    """The alert sections' data attributes, the chain head and every src/href of the page."""

    def __init__(self) -> None:
        super().__init__()
        self.alerts: dict[int, tuple[str, str]] = {}
        self.links: list[str] = []
        self.tags: set[str] = set()
        self._in_head = False
        self.head = ""

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        self.tags.add(tag)
        if tag == "section" and "data-alert-id" in a:
            self.alerts[int(a["data-alert-id"] or 0)] = (a["data-value"] or "", a["data-threshold"] or "")
        self.links += [v or "" for k, v in attrs if k in ("src", "href")]
        self._in_head = a.get("id") == "chain-head"

    def handle_data(self, data: str) -> None:
        if self._in_head:
            self.head += data

    def handle_endtag(self, tag: str) -> None:
        self._in_head = False


def test_report_numbers_match_the_archive(archive, tmp_path: Path) -> None:
    url, _, result, added = archive
    out = tmp_path / "review.html"
    assert main(["report", "--store", url, "--from", PERIOD[0], "--to", PERIOD[1], "--out", str(out)]) is None
    page = out.read_text(encoding="utf-8")
    parsed = _Collector()
    parsed.feed(page)
    with open_store(url) as store:
        archived = store.list_alerts(since=PERIOD[0], until=PERIOD[1], limit=None).items
        head = chain_head(store)
        assert verify_chain(store).ok
    assert 0 < len(archived) < len(added)  # the period filter keeps some alerts out
    assert parsed.alerts == {a.id: (repr(a.value), repr(a.threshold)) for a in archived}
    assert parsed.head == str(head)
    assert "The hash chain verifies" in page
    assert CAUTION in page
    assert result.config.hash() in page  # the configuration in force
    assert "reviewer one" in page and "checked &lt;b&gt;by hand&lt;/b&gt; &amp; &quot;fine&quot;" in page
    # the explanation recomputed from the archive equals the one computed at alert time
    for a in archived:
        expected = explain_alert(result, a.window_end, a.summary).to_text()
        assert _escape(expected) in page


def _escape(text: str) -> str:
    import html

    return html.escape(text, quote=True)


def test_report_is_self_contained(archive) -> None:
    url, _, _, _ = archive
    with open_store(url) as store:
        review = collect_review(store, *PERIOD)
    page = render_html(review)
    parsed = _Collector()
    parsed.feed(page)
    assert "script" not in parsed.tags
    assert parsed.links and all(link.startswith(("data:image/png;base64,", "#alert-")) for link in parsed.links)
    assert sum(link.startswith("data:image/png") for link in parsed.links) == len(review.series) == 1
    assert "http://" not in page and "https://" not in page


def test_tampered_archive_is_reported(archive, tmp_path: Path) -> None:
    url, folder, _, _ = archive
    copy = tmp_path / "tampered.sqlite"
    shutil.copy(folder / "archive.sqlite", copy)
    with sqlite3.connect(copy) as db:  # tampering on purpose: go around the append-only triggers
        for (name,) in db.execute("SELECT name FROM sqlite_master WHERE type = 'trigger' AND tbl_name = 'alerts'"):
            db.execute(f"DROP TRIGGER {name}")
        first = db.execute("SELECT id, value FROM alerts ORDER BY seq LIMIT 1").fetchone()
        db.execute("UPDATE alerts SET value = ? WHERE id = ?", (first[1] * 2, first[0]))
    with open_store(f"sqlite:///{copy}") as store:
        review = collect_review(store, *PERIOD, recompute=False)
    page = render_html(review, images={})
    assert not review.verification.ok
    assert "does NOT verify" in page and f"id {first[0]}" in page


def test_backwards_period_is_one_line_error(archive, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    url, _, _, _ = archive
    with pytest.raises(SystemExit) as exit_info:
        main(
            ["report", "--store", url, "--from", "2032-01-01", "--to", "2031-01-01", "--out", str(tmp_path / "x.html")]
        )
    assert exit_info.value.code == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("riskshape: error:") and "backwards" in err and "\n" not in err


CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")


@pytest.mark.skipif(
    CHROMIUM is None, reason="Debian's chromium is not installed (apt-get install chromium; .ci/run does)"
)
def test_report_renders_in_headless_chromium(archive, tmp_path: Path) -> None:
    url, _, _, _ = archive
    with open_store(url) as store:
        write_report(collect_review(store, *PERIOD), tmp_path / "review.html")
    shot = tmp_path / "shot.png"
    command = [
        str(CHROMIUM),
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        f"--user-data-dir={tmp_path / 'profile'}",
        "--enable-logging=stderr",
        "--v=0",
        "--hide-scrollbars",
        "--window-size=1200,2400",
        f"--screenshot={shot}",
        (tmp_path / "review.html").as_uri(),
    ]
    done = subprocess.run(command, capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    # the page logs nothing to the console (a blocked resource or a script error would be logged here)
    assert [line for line in done.stderr.splitlines() if ":CONSOLE" in line] == []
    pixels = imread(shot)[..., :3]
    assert pixels.shape[:2] == (2400, 1200)
    assert pixels.std() > 0.05  # not a blank page
    # the summaries plot is on screen: its H0 line takes the palette's H0 colour, which the page's text does not use
    h0 = palette.dimension_mark(0).color
    blue = np.all(np.abs(pixels - np.array([int(h0[i : i + 2], 16) for i in (1, 3, 5)]) / 255.0) < 0.06, axis=-1)
    assert blue.sum() > 500


def _pdf_unusable() -> str | None:
    try:
        import pypdf  # noqa: F401
        import weasyprint  # noqa: F401
    except (ImportError, OSError) as err:  # OSError: WeasyPrint's system libraries (pango) are missing
        return f"PDF output needs riskshape[pdf] and pango: {err}"
    return None


@pytest.mark.skipif(_pdf_unusable() is not None, reason=str(_pdf_unusable()))
def test_pdf_holds_the_same_report(archive, tmp_path: Path) -> None:
    import pypdf

    url, _, _, _ = archive
    pdf = tmp_path / "review.pdf"
    main(
        [
            "report",
            "--store",
            url,
            "--from",
            PERIOD[0],
            "--to",
            PERIOD[1],
            "--out",
            str(tmp_path / "r.html"),
            "--pdf",
            str(pdf),
        ]
    )
    reader = pypdf.PdfReader(pdf)
    text = "".join("".join(page.extract_text().split()) for page in reader.pages)  # no whitespace: lines wrap
    with open_store(url) as store:
        archived = store.list_alerts(since=PERIOD[0], until=PERIOD[1], limit=None).items
        head = chain_head(store)
    assert "".join(CAUTION.split()) in text
    assert head.head_hash in text
    for a in archived:
        assert repr(a.value) in text and repr(a.threshold) in text and a.inputs_hash in text
    assert any(page.images for page in reader.pages)  # the summaries plot


def test_archived_explanation_is_preferred_and_labelled(archive) -> None:
    """From typed inputs: an explanation archived with the alert is shown as archived."""
    from dataclasses import replace
    from types import SimpleNamespace

    from riskshape.outputs.report import ReportedAlert, archived_explanation

    url, _, result, added = archive
    with open_store(url) as store:
        review = collect_review(store, *PERIOD, recompute=False)
    assert review.alerts and all(a.explanation_source == "unavailable" for a in review.alerts)
    first = review.alerts[0]
    explanation = explain_alert(result, first.alert.window_end, first.alert.summary)
    stored = SimpleNamespace(explanation=explanation.to_json())
    assert archived_explanation(stored) == explanation  # type: ignore[arg-type]
    assert archived_explanation(first.alert) is None  # no explanation archived in this store
    shown = ReportedAlert(first.alert, first.reviews, explanation, "archived", "archived with the alert")
    page = render_html(replace(review, alerts=(shown,)), images={})
    assert "Explanation (archived)" in page and _escape(explanation.to_text()) in page
