"""The console in a real browser: Debian's chromium, headless, driven by Playwright for Python.

``riskshape serve`` runs on a free port over a fresh archive holding one fictional portfolio. A
reviewer signs in, filters the queue, opens an alert and escalates it with a comment; the same
reviewer may not close it (four eyes); a second reviewer signs in and closes it; the period is
signed off. Then ``riskshape audit verify`` passes and ``riskshape report`` shows the same review
history. Every page is screenshotted into ``test-artifacts/console/`` (listed in .gitignore) and
checked for labelled form controls, severity in words, and the absence of any API key.

Skipped, with the reason, only where no chromium is installed (``.ci/run`` installs Debian's).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import httpx
import pytest
from click.testing import CliRunner

from riskshape.caution import CAUTION
from riskshape.cli import cli
from riskshape.demo.scenario import generate_scenario
from tests.kit.service import csv_body, free_port, wait_until_healthy, write_config
from tests.service.console.conftest import PORTFOLIO

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
ARTIFACTS = Path(__file__).resolve().parents[3] / "test-artifacts" / "console"

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="no chromium installed (apt-get install chromium)"),
]
sync_api = pytest.importorskip("playwright.sync_api", reason="playwright is not installed (pip install playwright)")

# every visible form control must have a label (its <label for>, a wrapping label, or aria-label)
UNLABELLED_CONTROLS = """() => Array.from(document.querySelectorAll('input, select, textarea'))
  .filter(e => e.type !== 'hidden')
  .filter(e => !(e.labels && e.labels.length) && !e.getAttribute('aria-label'))
  .map(e => e.outerHTML)"""
# each severity shown must carry its word (readable without colour)
SEVERITY_WORDS = """() => Array.from(document.querySelectorAll('.severity')).map(e => e.textContent.trim())"""


@dataclass(frozen=True)
class Console:
    base: str
    url: str
    keys: dict[str, str]
    log: Path


def _key(url: str, role: str, owner: str) -> str:
    result = CliRunner().invoke(cli, ["keys", "create", "--role", role, "--owner", owner, "--store", url])
    assert result.exit_code == 0, result.output
    return result.stdout.strip().splitlines()[0]


@pytest.fixture(scope="module")
def console(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Console]:
    folder = tmp_path_factory.mktemp("console")
    url = f"sqlite:///{folder / 'archive.sqlite'}"
    keys = {
        "first": _key(url, "reviewer", "first-reviewer"),
        "second": _key(url, "reviewer", "second-reviewer"),
        "reader": _key(url, "reader", "reader-owner"),
        "ingest": _key(url, "ingest", "ingest-owner"),
        "admin": _key(url, "admin", "admin-owner"),
    }
    port, log = free_port(), folder / "server.log"
    command = [sys.executable, "-m", "riskshape", "serve", "--store", url, "--host", "127.0.0.1", "--port", str(port)]
    command += ["--config", str(write_config(folder))]
    with log.open("wb") as sink:
        process = subprocess.Popen(command, stdout=sink, stderr=subprocess.STDOUT, env=dict(os.environ))
    base = f"http://127.0.0.1:{port}"
    try:
        wait_until_healthy(process, base, log)
        prices = generate_scenario(seed=5, n_days=60, assets_per_sector=4).prices
        with httpx.Client(base_url=base, timeout=120) as client:
            made = client.post("/v1/portfolios", json={"name": PORTFOLIO}, headers={"X-Riskshape-Key": keys["admin"]})
            assert made.status_code == 201, made.text
            fed = client.post(
                f"/v1/portfolios/{PORTFOLIO}/prices",
                content=csv_body(prices),
                headers={"X-Riskshape-Key": keys["ingest"], "Content-Type": "text/csv"},
            )
            assert fed.status_code == 200, fed.text
        yield Console(base, url, keys, log)
    finally:
        process.terminate()
        try:
            process.wait(timeout=20)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=20)


@pytest.fixture(scope="module")
def browser(console: Console) -> Iterator[object]:
    with sync_api.sync_playwright() as driver:
        launched = driver.chromium.launch(executable_path=CHROMIUM, headless=True, args=["--no-sandbox"])
        try:
            yield launched
        finally:
            launched.close()


class Visit:
    """A browser tab that checks every page it shows and keeps a screenshot of it."""

    def __init__(self, page: object, console: Console) -> None:
        self.page = page
        self.console = console
        self.seen: list[tuple[str, str]] = []

    def check(self, name: str) -> None:
        page = self.page
        page.wait_for_load_state()  # type: ignore[attr-defined]
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"{name}.png"), full_page=True)  # type: ignore[attr-defined]
        html = page.content()  # type: ignore[attr-defined]
        self.seen.append((page.url, html))  # type: ignore[attr-defined]
        assert CAUTION in html, f"{name}: the caution is missing"
        assert page.evaluate(UNLABELLED_CONTROLS) == [], f"{name}: form controls without a label"  # type: ignore[attr-defined]
        words = page.evaluate(SEVERITY_WORDS)  # type: ignore[attr-defined]
        assert all(w in ("info", "warning", "critical") for w in words), f"{name}: severity without its word: {words}"

    def sign_in(self, key: str, name: str) -> None:
        page = self.page
        page.goto(f"{self.console.base}/console/")  # type: ignore[attr-defined]
        assert "/console/sign-in" in page.url  # type: ignore[attr-defined]
        self.check(f"{name}-sign-in")
        page.get_by_label("API key").fill(key)  # type: ignore[attr-defined]
        page.get_by_role("button", name="Sign in").click()  # type: ignore[attr-defined]
        page.wait_for_url(f"{self.console.base}/console/")  # type: ignore[attr-defined]


def test_review_an_alert_end_to_end_in_the_browser(console: Console, browser: object) -> None:
    context = browser.new_context(viewport={"width": 1280, "height": 900})  # type: ignore[attr-defined]
    visit = Visit(context.new_page(), console)
    page = visit.page

    # a reviewer signs in, reads the overview and the portfolio
    visit.sign_in(console.keys["first"], "01-first")
    visit.check("02-overview")
    assert page.get_by_role("heading", name=PORTFOLIO).count() == 1
    page.get_by_role("link", name=PORTFOLIO).first.click()
    visit.check("03-portfolio")
    assert page.locator("svg.chart").count() >= 3  # summaries, heatmap, barcode

    # the queue, filtered by portfolio and status
    page.get_by_role("link", name="Alert queue").click()
    page.get_by_label("Portfolio", exact=True).select_option(PORTFOLIO)
    page.get_by_label("Status", exact=True).select_option("open")
    page.get_by_role("button", name="Filter").click()
    assert "status=open" in page.url
    visit.check("04-queue")
    rows = page.locator("tbody tr")
    assert rows.count() >= 2
    assert page.locator("td .status").all_text_contents() == ["open"] * rows.count()

    # open the first alert and escalate it with a comment
    link = page.locator("tbody tr td a").first
    alert_name = link.text_content()
    link.click()
    visit.check("05-alert")
    alert_url = page.url
    page.get_by_label("Action").select_option("escalate")
    page.get_by_label("Comment").fill("Correlation jump across two sectors; desk to confirm")
    page.get_by_role("button", name="Record the review").click()
    visit.check("06-escalated")
    assert page.locator("dd .status").text_content() == "escalated"

    # four eyes: the reviewer who escalated may not close it
    assert "another reviewer must close it" in page.content()
    page.get_by_label("Action").select_option("close")
    page.get_by_role("button", name="Record the review").click()
    visit.check("07-four-eyes-refused")
    assert "four eyes" in page.get_by_role("alert").text_content()
    assert page.locator("dd .status").text_content() == "escalated"

    # the reproduce action says whether the archive reproduces the alert
    page.get_by_role("button", name="Reproduce from the archive").click()
    visit.check("08-reproduced")
    assert page.get_by_text("Matches: every check passed").count() == 1

    # a second reviewer signs in and closes it
    page.get_by_role("button", name="Sign out").click()
    page.wait_for_url(f"{console.base}/console/sign-in")
    visit.sign_in(console.keys["second"], "09-second")
    page.goto(alert_url)
    page.get_by_label("Action").select_option("close")
    page.get_by_label("Comment").fill("Confirmed with the desk; no action needed")
    page.get_by_role("button", name="Record the review").click()
    visit.check("10-closed")
    assert page.locator("dd .status").text_content() == "closed"
    window_end = page.locator("dl.facts dt:text-is('Window end') + dd").text_content()

    # sign-off: the whole history is refused (other alerts are open), listing them; then the alert's day
    page.get_by_role("link", name="Audit").click()
    visit.check("11-audit")
    _settle_others(console, window_end, alert_name)
    page.get_by_label("First window end").first.fill("2000-01-01")
    page.get_by_label("Last window end").first.fill("2100-12-31")
    page.get_by_role("button", name="Sign the period off").click()
    visit.check("12-sign-off-refused")
    assert "still open or escalated" in page.get_by_role("alert").text_content()
    page.get_by_label("First window end").first.fill(window_end)
    page.get_by_label("Last window end").first.fill(window_end)
    page.get_by_label(PORTFOLIO).check()
    page.get_by_role("button", name="Sign the period off").click()
    visit.check("13-signed-off")
    assert "signed off by second-reviewer" in page.get_by_role("status").text_content()
    assert page.locator("table tbody tr").first.text_content().count("second-reviewer") == 1

    # the chain verifies, and the report shows the same history
    verified = CliRunner().invoke(cli, ["audit", "verify", "--store", console.url])
    assert verified.exit_code == 0, verified.output
    out = console.log.parent / "report.html"
    made = CliRunner().invoke(
        cli, ["report", "--store", console.url, "--from", window_end, "--to", window_end, "--out", str(out)]
    )
    assert made.exit_code == 0, made.output
    report = out.read_text(encoding="utf-8")
    for fact in ("first-reviewer", "escalate", "Correlation jump across two sectors", "second-reviewer", "close"):
        assert fact in report, fact

    # no key anywhere: not in a page, not in a URL, not in the server's log
    context.close()
    log = console.log.read_text(errors="replace")
    for token in console.keys.values():
        assert token not in log
        for url, html in visit.seen:
            assert token not in url and token not in html


def _settle_others(console: Console, window_end: str, alert_name: str | None) -> int:
    """Acknowledge (as the second reviewer, through the API) the other alerts of the alert's day."""
    headers = {"X-Riskshape-Key": console.keys["second"]}
    with httpx.Client(base_url=console.base, timeout=60) as client:
        found = client.get("/v1/alerts", params={"start": window_end, "end": window_end}, headers=headers).json()
        others = [a["id"] for a in found["items"] if f"Alert {a['id']}" != alert_name]
        for alert_id in others:
            answer = client.post(f"/v1/alerts/{alert_id}/reviews", json={"action": "acknowledge"}, headers=headers)
            assert answer.status_code == 201, answer.text
    return len(others)


def test_an_admin_manages_keys_in_the_browser(console: Console, browser: object) -> None:
    context = browser.new_context(viewport={"width": 1280, "height": 900})  # type: ignore[attr-defined]
    visit = Visit(context.new_page(), console)
    page = visit.page
    visit.sign_in(console.keys["admin"], "14-admin")
    page.get_by_role("link", name="API keys").click()
    visit.check("15-keys")
    assert page.locator("tbody tr").count() == len(console.keys)

    page.get_by_role("textbox", name="Owner").fill("Analyst Vey")
    page.locator("#k-role-reader").check()
    page.get_by_role("button", name="Create the key").click()
    visit.check("16-key-created")
    token = page.locator("#new-token").input_value()
    assert token.count(".") == 1 and page.content().count(token) == 1  # shown once, on this page only
    assert token not in page.url
    key_id = token.split(".")[0]

    page.goto(f"{console.base}/console/keys")  # shown never again
    assert token not in page.content() and key_id in page.content()
    page.get_by_role("button", name=f"Revoke key {key_id} of Analyst Vey").click()
    visit.check("17-key-revoked")
    assert f"Key {key_id}" in page.get_by_role("status").text_content()
    assert page.get_by_role("button", name=f"Revoke key {key_id} of Analyst Vey").count() == 0
    context.close()
    assert token not in console.log.read_text(errors="replace")
    assert all(token not in url for url, _ in visit.seen)
