"""The review report a reviewer signs: the sign-off block, the corrections that changed archived
values, the configurations of the period's runs once each, and values rounded for reading while
the export keeps them exact.
"""

from __future__ import annotations

import io
import math
import re
from html.parser import HTMLParser

import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.demo.scenario import generate_scenario
from riskshape.outputs import export_alerts
from riskshape.outputs.report import collect_review, render_html
from riskshape.reviews import list_queue, review_alert, sign_off
from riskshape.store import open_store, verify_chain
from tests.outputs.test_report import PERIOD, RULES, record_run

ONE, TWO, THREE = "book-one", "book-two", "book-three"
Archive = tuple[str, dict[str, pd.Timestamp], str]
"""The archive's URL, the dates whose prices were corrected, and the corrected asset."""


@pytest.fixture(scope="module")
def archive(tmp_path_factory: pytest.TempPathFactory) -> Archive:
    """Three fictional portfolios: ONE run twice with one configuration (the second run corrects three
    prices), TWO only before the period, THREE over the period with another configuration.
    """
    folder = tmp_path_factory.mktemp("review-report")
    url = f"sqlite:///{folder / 'archive.sqlite'}"
    prices = generate_scenario(seed=5, n_days=400, assets_per_sector=4).prices
    serial = {"executor": "serial"}
    one = Config.model_validate({"window": 40, "step": 5, "compute": serial, "alerts": {"rules": RULES}})
    with open_store(url) as store:
        record_run(store, ONE, monitor(prices, one))
        first_end = min(d for d in store.window_ends(ONE) if str(d) >= PERIOD[0])
        dates = list(prices.index)
        at = dates.index(pd.Timestamp(first_end))
        corrected = {
            "inside": dates[at + 20],  # a window end of the period
            "lookback": dates[at - 10],  # before the period, read by its first window
            "outside": dates[at - 60],  # read by no window of the period
        }
        fixed = prices.copy()
        asset = str(prices.columns[0])
        for day in corrected.values():
            fixed.loc[day, asset] *= 1.05
        record_run(store, ONE, monitor(fixed, one))
        record_run(
            store,
            TWO,
            monitor(prices.loc[:"2031-04-15"], Config.model_validate({"window": 30, "step": 5, "compute": serial})),
        )
        record_run(store, THREE, monitor(prices, Config.model_validate({"window": 35, "step": 5, "compute": serial})))
    return url, corrected, asset


def _cells(html: str, table_id: str) -> list[list[str]]:
    """The text of each row's cells of the table with this id."""

    class Rows(HTMLParser):
        def __init__(self) -> None:
            super().__init__()
            self.rows: list[list[str]] = []
            self.inside = False
            self.cell: list[str] | None = None

        def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
            if tag == "table" and dict(attrs).get("id") == table_id:
                self.inside = True
            elif self.inside and tag == "tr":
                self.rows.append([])
            elif self.inside and tag in ("td", "th"):
                self.cell = []

        def handle_data(self, data: str) -> None:
            if self.cell is not None:
                self.cell.append(data)

        def handle_endtag(self, tag: str) -> None:
            if self.inside and tag in ("td", "th") and self.cell is not None:
                self.rows[-1].append("".join(self.cell).strip())
                self.cell = None
            elif tag == "table":
                self.inside = False

    parser = Rows()
    parser.feed(html)
    return parser.rows


def test_the_sign_off_block_counts_lists_and_names(archive: Archive) -> None:
    url, _, _ = archive
    with open_store(url) as store:
        alerts = list_queue(store, portfolio=ONE, start=PERIOD[0], end=PERIOD[1], limit=None).items
        assert len(alerts) >= 3
        closed, acknowledged, *still_open = [i.alert for i in alerts]
        review_alert(store, closed.id, "escalate", "Reviewer North", "two sectors moved together")
        review_alert(store, closed.id, "close", "Reviewer South", "confirmed")
        review_alert(store, acknowledged.id, "acknowledge", "Reviewer South")
        page = render_html(collect_review(store, *PERIOD, portfolio=ONE), images={})
        head = verify_chain(store).head
    heads, values = _cells(page, "status-counts")
    counts = dict(zip(heads, map(int, values), strict=True))
    assert counts == {"open": len(still_open), "acknowledged": 1, "escalated": 0, "dismissed": 0, "closed": 1}
    block = page[page.index('<section id="sign-off">') : page.index("</section>")]
    assert f"<h3>Open items ({len(still_open)})</h3>" in block
    assert sorted(map(int, re.findall(r'href="#alert-(\d+)"', block))) == sorted(a.id for a in still_open)
    assert "Reviewed by: Reviewer North, Reviewer South" in block
    assert f'<code id="sign-off-head">{head}</code>' in block
    assert "Not signed off yet." in block


def test_a_signed_period_shows_its_sign_off_with_the_head(archive: Archive) -> None:
    url, _, _ = archive
    with open_store(url) as store:
        done = sign_off(store, "2031-01-01", "2031-04-30", [TWO], "Signer West")  # TWO's alerts: none
        page = render_html(collect_review(store, "2031-01-01", "2031-04-30", portfolio=TWO), images={})
    rows = _cells(page, "sign-offs")
    assert rows[1][:4] == ["2031-01-01", "2031-04-30", TWO, "Signer West"]
    assert rows[1][5] == str(done.chain_head)


def test_corrections_that_changed_the_periods_windows_are_listed(archive: Archive) -> None:
    url, corrected, asset = archive
    with open_store(url) as store:
        report = collect_review(store, *PERIOD, portfolio=ONE)
    listed = {(c.date, c.asset) for c in report.corrections}
    assert (corrected["inside"].date(), asset) in listed
    # A window ending at t reads the `window` returns before t (DESIGN.md, "The computation, per
    # window"), so a correction ten dates before the first window end changed archived windows too.
    assert (corrected["lookback"].date(), asset) in listed
    assert (corrected["outside"].date(), asset) not in listed
    rows = _cells(render_html(report, images={}), "corrections")
    assert [corrected["lookback"].date().isoformat(), asset] == rows[1][:2]
    for row, c in zip(rows[1:], report.corrections, strict=True):
        assert math.isclose(float(row[4]) / float(row[3]), c.new_price / c.old_price, rel_tol=1e-3)


def test_configurations_once_and_only_of_the_periods_runs(archive: Archive) -> None:
    url, _, _ = archive
    with open_store(url) as store:
        runs = {name: store.list_runs(name) for name in (ONE, TWO, THREE)}
        every = collect_review(store, *PERIOD)
        only_one = collect_review(store, *PERIOD, portfolio=ONE)
    hash_one, hash_two, hash_three = (runs[n][-1].config_hash for n in (ONE, TWO, THREE))
    assert len(runs[ONE]) == 2 and runs[ONE][0].config_hash == hash_one  # one configuration, two runs
    assert len({hash_one, hash_two, hash_three}) == 3
    assert [r.config_hash for r in every.runs] == [hash_one, hash_three]  # TWO has no window in the period
    assert [r.config_hash for r in only_one.runs] == [hash_one]
    page = render_html(every, images={})
    assert page.count(f"<tr><th>config hash</th><td>{hash_one}</td>") == 1
    assert hash_two not in page


def test_values_rounded_for_reading_and_exact_in_the_export(archive: Archive) -> None:
    url, _, _ = archive
    with open_store(url) as store:
        report = collect_review(store, *PERIOD, portfolio=ONE)
        exported = pd.read_csv(io.StringIO(export_alerts(store, "csv", start=PERIOD[0], end=PERIOD[1], portfolio=ONE)))
    item = report.alerts[0]
    value = item.alert.value
    page = render_html(report, images={})
    section = page[page.index(f'id="alert-{item.alert.id}"') :]
    shown = re.search(r'<td class="value">([^<]+)</td>', section)
    assert shown is not None
    # 4 significant digits, computed here from the definition (round to 3 - floor(log10|x|) decimals)
    digits = 3 - math.floor(math.log10(abs(value)))
    assert float(shown.group(1)) == pytest.approx(round(value, digits), rel=1e-12)
    assert len(shown.group(1).replace("-", "").replace(".", "").lstrip("0").rstrip("0")) <= 4
    assert repr(value) not in re.sub(r'data-[a-z]+="[^"]*"', "", page)  # only the data attributes hold it
    exact = exported.loc[exported["id"] == item.alert.id, "value"]
    assert exact.tolist() == [value]  # the export keeps the exact float (pandas reads it back bit for bit)
