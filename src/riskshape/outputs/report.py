"""The review report: one self-contained HTML file for a period of the archive.

:func:`collect_review` reads the archive (alerts in the period with their reviews and
explanations, the summaries over time, the configurations in force, the verification of the
hash chain); :func:`render_html` turns that into one HTML page with every plot embedded as a
base64 PNG, no script and no external reference (a Content-Security-Policy forbids loading
anything but inline data); :func:`write_report` writes it, and a PDF of the same page with
WeasyPrint where it is installed.

Explanations come from the archive when it holds one for the alert (archived inside the hash
chain); otherwise they are recomputed from the archived prices and configuration of the alert's
run and marked as recomputed, with a check that the window's inputs hash to the archived value.
"""

from __future__ import annotations

import base64
import html
import io
import json
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import date, datetime, timezone
from pathlib import Path
from typing import Any, Literal, cast

import pandas as pd

from riskshape._version import __version__
from riskshape.archive import recompute_run
from riskshape.caution import CAUTION
from riskshape.errors import ConfigError, DataError, RiskshapeError, StoreError
from riskshape.explain import Explanation, explain_alert, render_text
from riskshape.outputs import palette
from riskshape.outputs.export import knowledge_label
from riskshape.reviews import STATUSES, UNSETTLED, SignOff, list_sign_offs, status_of
from riskshape.selection import to_period
from riskshape.store import (
    AlertRecord,
    EventRecord,
    PriceCorrection,
    ReviewRecord,
    Run,
    Store,
    VerifyReport,
    verify_chain,
)
from riskshape.store.knowledge import to_known_at
from riskshape.types import AlertStatus

__all__ = [
    "ReportedAlert",
    "PortfolioSeries",
    "ReviewReport",
    "collect_review",
    "render_html",
    "write_report",
    "archived_explanation",
    "DEFAULT_SERIES",
]

DEFAULT_SERIES = ("mean_correlation", "h0_total_persistence", "h1_landscape_l1")
"""Summaries always plotted (with every summary an alert of the period watches)."""

Source = Literal["archived", "recomputed", "unavailable"]


@dataclass(frozen=True)
class ReportedAlert:
    """An alert of the period with its reviews and explanation.

    ``explanation_source`` says where the explanation came from; ``explanation_note`` says how it
    was checked, or why there is none.
    """

    alert: AlertRecord
    reviews: tuple[ReviewRecord, ...]
    explanation: Explanation | None
    explanation_source: Source
    explanation_note: str

    @property
    def status(self) -> AlertStatus:
        """The alert's status, derived from its chained reviews."""
        return status_of(self.reviews)


@dataclass(frozen=True)
class PortfolioSeries:
    """A portfolio's archived summaries over the period (``frame`` indexed by window end)."""

    portfolio: str
    frame: pd.DataFrame
    config_hash: str | None


@dataclass(frozen=True)
class ReviewReport:
    """Everything the review report shows (see :func:`collect_review`)."""

    period_from: date
    period_to: date
    generated_at: datetime
    store: str
    alerts: tuple[ReportedAlert, ...]
    series: tuple[PortfolioSeries, ...]
    runs: tuple[Run, ...]
    """One run per configuration in force in the period (the latest run of that configuration hash)."""
    verification: VerifyReport
    package_version: str = __version__
    corrections: tuple[PriceCorrection, ...] = ()
    """Price revisions of the period (each changed the archived windows that use that date)."""
    superseded: tuple[EventRecord, ...] = ()
    """Chained ``window_superseded`` / ``alert_superseded`` records of the period, where archived."""
    sign_offs: tuple[SignOff, ...] = ()
    """Sign-offs whose period overlaps this one."""
    known_at: datetime | None = None
    """The knowledge shown: None for what the archive knows now, else the moment asked for (the
    alerts, reviews, windows, runs, corrections and chained records recorded by then)."""

    @property
    def counts(self) -> dict[AlertStatus, int]:
        """Alerts of the period by status."""
        return {s: sum(a.status == s for a in self.alerts) for s in STATUSES}


def _knowledge_text(known_at: datetime | None) -> str:
    if known_at is None:
        return "Knowledge shown: current (everything the archive holds now)."
    return (
        f"Knowledge shown: as known at {knowledge_label(known_at)} -- exactly what riskshape showed then "
        "(alerts, reviews, windows and corrections recorded later are left out; the chain verification "
        "is of the archive now)."
    )


def archived_explanation(record: AlertRecord) -> Explanation | None:
    """The explanation archived with an alert, if the archive holds one (``record.explanation`` JSON)."""
    text = getattr(record, "explanation", None)
    return Explanation.from_json(text) if text else None


def _recompute(store: Store, alerts: list[AlertRecord]) -> dict[int, tuple[Explanation | None, Source, str]]:
    """Explanations of alerts without an archived one, recomputing each run once up to its last alert."""
    out: dict[int, tuple[Explanation | None, Source, str]] = {}
    by_run: dict[int, list[AlertRecord]] = {}
    for a in alerts:
        by_run.setdefault(a.run_id, []).append(a)
    for run_id, group in by_run.items():
        last = max(pd.Timestamp(a.window_end) for a in group)
        try:
            again = recompute_run(store, store.get_run(run_id), last, require_hashes=False)
            config, result, reason = again.config, again.result, again.reason
        except RiskshapeError as err:
            config, result, reason = None, None, str(err)
        if config is None or result is None:
            for a in group:
                out[a.id] = (None, "unavailable", f"could not recompute run {run_id}: {reason}")
            continue
        for a in group:
            end = pd.Timestamp(a.window_end)
            inputs = result.window_inputs_hash(end)
            if inputs != a.inputs_hash or config.hash() != a.config_hash:
                out[a.id] = (
                    None,
                    "unavailable",
                    "the archived prices or configuration no longer give this "
                    "window's inputs (hash mismatch); no explanation shown",
                )
                continue
            note = f"recomputed from run {run_id}'s archived prices; window inputs hash matches the alert's"
            out[a.id] = (explain_alert(result, end, a.summary), "recomputed", note)
    return out


def collect_review(
    store: Store,
    since: object,
    until: object,
    *,
    portfolio: str | None = None,
    recompute: bool = True,
    now: datetime | None = None,
    as_known_at: object = None,
) -> ReviewReport:
    """Read what the review report shows for window ends from ``since`` to ``until`` (inclusive).

    Parameters
    ----------
    store : Store
    since, until : date-like
        The period (window ends).
    portfolio : str, optional
        One portfolio (default: every portfolio).
    recompute : bool
        Recompute explanations the archive does not hold (see the module notes).
    now : datetime, optional
        Time stamp of the report (default: now, UTC).
    as_known_at : datetime or str, optional
        Report what riskshape showed at that moment (ISO 8601 with a timezone): alerts raised,
        reviews, windows, runs, corrections and chained records recorded by then. The chain
        verification is always of the archive as it is now. The report states the knowledge time.

    Returns
    -------
    ReviewReport

    Raises
    ------
    DataError
        If the period is not a pair of days with the start on or before the end.
    StoreError
        If the archive cannot be read.
    """
    period = to_period(since, until)
    if period.start is None or period.end is None:
        raise DataError("period: give both start and end of the period to report on")
    first, last = period.start, period.end
    known_at = to_known_at(as_known_at)
    page = store.list_alerts(portfolio=portfolio, since=first, until=last, limit=None, as_known_at=known_at)
    details = [store.get_alert(a.id, as_known_at=known_at) for a in page.items]
    missing = [d.alert for d in details if archived_explanation(d.alert) is None]
    recomputed = _recompute(store, missing) if recompute else {}
    alerts = []
    for d in details:
        archived = archived_explanation(d.alert)
        item: tuple[Explanation | None, Source, str]
        if archived is not None:
            item = (archived, "archived", "archived with the alert, inside the hash chain")
        else:
            item = recomputed.get(d.alert.id, (None, "unavailable", "not archived with the alert (not recomputed)"))
        alerts.append(ReportedAlert(d.alert, d.reviews, *item))
    names = [portfolio] if portfolio is not None else [p.name for p in store.list_portfolios()]
    series = []
    runs: list[Run] = []
    corrections: list[PriceCorrection] = []
    superseded: list[EventRecord] = []
    for name in names:
        feats = store.read_features(name, start=first, end=last, limit=None, as_known_at=known_at)
        if len(feats.frame):
            series.append(PortfolioSeries(name, feats.frame, feats.config_hash))
        used = {a.alert.config_hash for a in alerts if a.alert.portfolio == name}
        if len(feats.frame) and feats.config_hash is not None:
            used.add(feats.config_hash)
        latest: dict[str, Run] = {
            r.config_hash: r for r in store.list_runs(name) if r.config_hash in used and _known(r.created_at, known_at)
        }
        runs += sorted(latest.values(), key=lambda r: r.id)
        corrections += [
            c
            for c in store.list_corrections(
                name, start=_first_input_date(store, name, feats.frame, list(latest.values())), end=last
            )
            if _known(c.recorded_at, known_at)
        ]
        for kind in ("window_superseded", "alert_superseded"):
            superseded += [
                e
                for e in store.list_events(kind=kind, portfolio=name, as_known_at=known_at)
                if _subject_in(e, first, last)
            ]
    once: dict[str, Run] = {}
    for r in runs:
        once.setdefault(r.config_hash, r)
    signed = tuple(
        s for s in list_sign_offs(store) if s.start <= last and s.end >= first and _known(s.signed_at, known_at)
    )
    return ReviewReport(
        period_from=first,
        period_to=last,
        generated_at=(now or datetime.now(timezone.utc)).astimezone(timezone.utc),
        store=store.url,
        alerts=tuple(alerts),
        series=tuple(series),
        runs=tuple(once.values()),
        verification=verify_chain(store),
        corrections=tuple(corrections),
        superseded=tuple(superseded),
        sign_offs=signed,
        known_at=known_at,
    )


def _known(stamp: datetime, known_at: datetime | None) -> bool:
    return known_at is None or stamp <= known_at


def _first_input_date(store: Store, name: str, frame: pd.DataFrame, runs: list[Run]) -> date | None:
    """The earliest price date the period's windows of ``name`` read: a correction from then on changed them.

    A window ending at ``t`` reads the ``window`` returns up to ``t``, so the prices from ``window``
    archived dates before ``t`` (the longest window of the portfolio's runs in the period). None
    (no lower bound) when the period holds no window.
    """
    lengths = [int(cast(Mapping[str, Any], r.config.get("monitor", {})).get("window", 0)) for r in runs]
    window = max([n for n in lengths if n > 0], default=0)
    if not len(frame) or window == 0:
        return None
    first_end = pd.Timestamp(min(frame.index))
    dates = store.read_prices(name, end=first_end.date()).index
    position = int(dates.searchsorted(first_end, side="right")) - 1
    return pd.Timestamp(dates[max(position - window, 0)]).date() if len(dates) else None


def _subject_in(event: EventRecord, first: date, last: date) -> bool:
    """Whether an event's subject (a day, or an id) concerns the period; undated subjects are kept."""
    try:
        day = date.fromisoformat(str(event.subject)[:10])
    except ValueError:
        return True
    return first <= day <= last


# --- rendering ----------------------------------------------------------------------------------


def _summaries_png(s: PortfolioSeries, alerts: tuple[ReportedAlert, ...]) -> bytes:
    from riskshape.outputs.plots import plot_summaries

    watched = [a.alert.summary for a in alerts if a.alert.portfolio == s.portfolio]
    columns = [c for c in dict.fromkeys([*DEFAULT_SERIES, *watched]) if c in s.frame.columns]
    marks = {
        c: pd.DatetimeIndex(
            [
                pd.Timestamp(a.alert.window_end)
                for a in alerts
                if a.alert.portfolio == s.portfolio and a.alert.summary == c
            ]
        )
        for c in columns
    }
    fig = plot_summaries(s.frame, columns, alerts=marks)
    fig.suptitle(f"{s.portfolio}: summaries by window end")
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=110)
    return buffer.getvalue()


def _e(value: object) -> str:
    return html.escape(str(value), quote=True)


def _round(value: float) -> str:
    """A value rounded for reading: 4 significant digits (the export keeps the exact value)."""
    return f"{value:.4g}"


def _history(reviews: tuple[ReviewRecord, ...]) -> str:
    """Every review action in order, e.g. ``escalate > acknowledge`` (never only the last)."""
    return " > ".join(r.action for r in reviews) or "none"


def _sign_off_html(report: ReviewReport) -> str:
    counts = report.counts
    unsettled = [a for a in report.alerts if a.status in UNSETTLED]
    reviewers = sorted({r.reviewer for a in report.alerts for r in a.reviews})
    cells = "".join(f"<td>{counts[s]}</td>" for s in STATUSES)
    heads = "".join(f"<th>{s}</th>" for s in STATUSES)
    items = (
        "<ul>"
        + "".join(
            f'<li><a href="#alert-{a.alert.id}">alert {a.alert.id}</a> ({_e(a.alert.portfolio)}, {_e(a.alert.rule)}, '
            f'<span class="nowrap">{_e(a.alert.window_end)}</span>): {_e(a.status)}</li>'
            for a in unsettled
        )
        + "</ul>"
        if unsettled
        else "<p>No open or escalated alert: the period can be signed off.</p>"
    )
    signed = "".join(
        f'<tr><td class="date">{_e(s.start)}</td><td class="date">{_e(s.end)}</td>'
        f"<td>{_e(', '.join(s.portfolios))}</td>"
        f'<td>{_e(s.signer)}</td><td class="date">{_e(s.signed_at.isoformat(timespec="seconds"))}</td>'
        f'<td class="hash">{_e(s.chain_head)}</td></tr>'
        for s in report.sign_offs
    )
    signed_table = (
        f'<table id="sign-offs"><tr><th>start</th><th>end</th><th>portfolios</th><th>signed by</th><th>at</th>'
        f"<th>chain head at signing</th></tr>{signed}</table>"
        if signed
        else "<p>Not signed off yet.</p>"
    )
    return (
        f'<section id="sign-off"><h2>Sign-off</h2><p>Period: window ends <span class="nowrap">{_e(report.period_from)}'
        f'</span> to <span class="nowrap">{_e(report.period_to)}</span>. Chain head: '
        f'<code id="sign-off-head">{_e(report.verification.head)}</code></p>'
        f'<table id="status-counts"><tr>{heads}</tr><tr>{cells}</tr></table>'
        f"<h3>Open items ({len(unsettled)})</h3>{items}"
        f"<p>Reviewed by: {_e(', '.join(reviewers) or 'nobody yet')}</p>{signed_table}</section>"
    )


def _corrections_html(report: ReviewReport) -> str:
    if not report.corrections and not report.superseded:
        return "<p>No correction changed archived values in the period.</p>"
    rows = "".join(
        f'<tr><td class="date">{_e(c.date)}</td><td class="code">{_e(c.asset)}</td><td>{c.revision}</td>'
        f"<td>{_e(_round(c.old_price))}</td><td>{_e(_round(c.new_price))}</td>"
        f'<td class="date">{_e(c.recorded_at.isoformat(timespec="seconds"))}</td></tr>'
        for c in report.corrections
    )
    events = "".join(
        f"<li>{_e(e.kind)} ({_e(e.portfolio)}, {_e(e.subject)}), ledger seq {e.seq}</li>" for e in report.superseded
    )
    return (
        f'<table id="corrections"><tr><th>date</th><th>asset</th><th>revision</th><th>old price</th>'
        f"<th>new price</th><th>recorded</th></tr>{rows}</table>"
        + (f'<ul id="superseded">{events}</ul>' if events else "")
        + "<p>Each corrected price changes every archived window that includes its date.</p>"
    )


# colours from the one palette (riskshape.outputs.palette), as CSS custom properties
_STYLE = (
    palette.css()
    + """
@page{size:A4;margin:1.5cm}
td,th{word-break:normal;overflow-wrap:normal;hyphens:manual}
.nowrap,td.date,td.code,code{white-space:nowrap}td.hash{font-family:monospace;font-size:.75em;overflow-wrap:anywhere}
body{font-family:sans-serif;margin:2em;color:var(--rs-ink);max-width:70em}
h1{font-size:1.5em}h2{font-size:1.2em;border-bottom:1px solid var(--rs-rule);margin-top:2em}
table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid var(--rs-faint);padding:.2em .5em;text-align:left;
vertical-align:top;font-size:.9em}th{background:var(--rs-header-fill)}
.caution{border:2px solid var(--rs-caution-edge);padding:.6em;background:var(--rs-caution-fill)}
.ok{color:var(--rs-good)}.bad{color:var(--rs-bad);font-weight:bold}pre{background:var(--rs-code-fill);padding:.5em;
white-space:pre-wrap;font-size:.85em}img{max-width:100%}code{font-size:.9em}
"""
)


def _alert_html(item: ReportedAlert) -> str:
    a = item.alert
    rows = "".join(
        f'<tr><th>{_e(k)}</th><td class="{_e(k)}">{_e(v)}</td></tr>'
        for k, v in (
            ("portfolio", a.portfolio),
            ("rule", a.rule),
            ("summary", a.summary),
            ("kind", a.kind),
            ("severity", a.severity),
            ("window end", a.window_end),
            ("value", _round(a.value)),
            ("threshold", _round(a.threshold)),
            ("status", item.status),
            ("raised at", a.raised_at.isoformat()),
            ("run", a.run_id),
            ("config hash", a.config_hash),
            ("inputs hash", a.inputs_hash),
            ("package version", a.package_version),
            ("ledger seq", a.seq),
            ("entry hash", a.entry_hash),
        )
    )
    if item.reviews:
        reviews = (
            "<table><tr><th>when</th><th>action</th><th>reviewer</th><th>comment</th></tr>"
            + "".join(
                f'<tr class="review"><td>{_e(r.created_at.isoformat())}</td><td>{_e(r.action)}</td>'
                f"<td>{_e(r.reviewer)}</td><td>{_e(r.comment)}</td></tr>"
                for r in item.reviews
            )
            + "</table>"
        )
    else:
        reviews = "<p>Not reviewed yet.</p>"
    text = render_text(item.explanation) if item.explanation is not None else "No explanation."
    return (
        f'<section class="alert" id="alert-{a.id}" data-alert-id="{a.id}" data-value="{_e(repr(a.value))}" '
        f'data-threshold="{_e(repr(a.threshold))}"><h3>Alert {a.id}: {_e(a.rule)} on {_e(a.summary)} '
        f"({_e(a.severity)}), window ending {_e(a.window_end)}</h3><table>{rows}</table>"
        f"<h4>Explanation ({_e(item.explanation_source)})</h4><p>{_e(item.explanation_note)}</p>"
        f'<pre class="explanation">{_e(text)}</pre><h4>Reviews</h4>{reviews}</section>'
    )


def render_html(report: ReviewReport, images: dict[str, bytes] | None = None) -> str:
    """The report as one self-contained HTML page.

    Parameters
    ----------
    report : ReviewReport
    images : dict of str to bytes, optional
        PNG plot of each portfolio's summaries (default: drawn here with :mod:`riskshape.outputs.plots`).

    Returns
    -------
    str
    """
    if images is None:
        images = {s.portfolio: _summaries_png(s, report.alerts) for s in report.series}
    v = report.verification
    verdict = (
        f'<p class="ok" id="chain-ok">The hash chain verifies: {v.checked} records checked.</p>'
        if v.ok
        else f'<p class="bad" id="chain-bad">The hash chain does NOT verify: first bad record {_e(v.first_bad)}.</p>'
    )
    plots = (
        "".join(
            f'<figure><img alt="summaries of {_e(name)}" src="data:image/png;base64,'
            f'{base64.b64encode(png).decode("ascii")}"><figcaption>{_e(name)}: summaries by window end; each '
            f"alert is marked by its severity's shape (circle: info, diamond: warning, cross: critical) with "
            f"its threshold beside it.</figcaption></figure>"
            for name, png in images.items()
        )
        or "<p>No summaries archived for the period.</p>"
    )
    runs = (
        "".join(
            f"<h3>Run {r.id} ({_e(r.portfolio)}), recorded {_e(r.created_at.isoformat())}</h3><table>"
            f"<tr><th>config hash</th><td>{_e(r.config_hash)}</td></tr><tr><th>prices hash</th><td>{_e(r.input_hash)}"
            f"</td></tr><tr><th>package version</th><td>{_e(r.package_version)}</td></tr><tr><th>prices</th><td>"
            f"{_e(r.first_date)} to {_e(r.last_date)}, {r.n_dates} dates, {len(r.assets)} assets</td></tr></table>"
            f'<pre class="config">{_e(json.dumps(r.config, indent=2, sort_keys=True))}</pre>'
            for r in report.runs
        )
        or "<p>No run recorded for the period.</p>"
    )
    alerts = "".join(_alert_html(a) for a in report.alerts) or "<p>No alert in the period.</p>"
    summary = "".join(
        f'<tr><td><a href="#alert-{a.alert.id}">{a.alert.id}</a></td><td class="date">{_e(a.alert.window_end)}</td>'
        f'<td>{_e(a.alert.portfolio)}</td><td class="code">{_e(a.alert.rule)}</td><td>{_e(a.alert.severity)}</td>'
        f"<td>{_e(_round(a.alert.value))}</td><td>{_e(_round(a.alert.threshold))}</td>"
        f'<td class="status">{_e(a.status)}</td><td>{_e(_history(a.reviews))}</td></tr>'
        for a in report.alerts
    )
    csp = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><meta http-equiv="Content-Security-Policy" content="{csp}">
<title>riskshape review {_e(report.period_from)} to {_e(report.period_to)}</title><style>{_STYLE}</style></head>
<body><h1>riskshape review: window ends {_e(report.period_from)} to {_e(report.period_to)}</h1>
<p class="caution" id="caution">{_e(CAUTION)}</p>
<p>Generated {_e(report.generated_at.isoformat())} by riskshape {_e(report.package_version)} from the archive
<code>{_e(report.store)}</code>.</p>
<p id="known-at">{_e(_knowledge_text(report.known_at))}</p>
{_sign_off_html(report)}
<h2>Chain verification</h2>{verdict}<p>Chain head: <code id="chain-head">{_e(v.head)}</code></p>
<h2>Alerts ({len(report.alerts)})</h2><table id="alert-summary"><tr><th>id</th><th>window end</th><th>portfolio</th>
<th>rule</th><th>severity</th><th>value</th><th>threshold</th><th>status</th><th>reviews</th></tr>{summary}</table>
<h2>Summaries over time</h2>{plots}
<h2>Alert details</h2>{alerts}
<h2>Corrections that changed archived values</h2>{_corrections_html(report)}
<h2>Configuration in force (once per configuration hash)</h2>{runs}
<p class="caution">{_e(CAUTION)}</p></body></html>
"""


def write_report(report: ReviewReport, out: str | Path, pdf: str | Path | None = None) -> Path:
    """Write the report as HTML to ``out`` (and as PDF to ``pdf`` if given).

    Parameters
    ----------
    report : ReviewReport
        From :func:`collect_review`.
    out : path-like
        The HTML file to write.
    pdf : path-like, optional
        A PDF file to write as well.

    Returns
    -------
    pathlib.Path
        The HTML file written.

    Raises
    ------
    StoreError
        If the file cannot be written.
    ConfigError
        If a PDF is asked for and WeasyPrint (``pip install 'riskshape[pdf]'``) is not usable.
    """
    page = render_html(report)
    path = Path(out)
    try:
        path.write_text(page, encoding="utf-8")
    except OSError as err:
        raise StoreError(
            f"{path}: cannot write the report ({err.strerror}); check the folder exists and is writable"
        ) from None
    if pdf is not None:
        try:
            from weasyprint import HTML
        except (ImportError, OSError) as err:
            raise ConfigError(
                f"--pdf needs WeasyPrint and its system libraries (pip install 'riskshape[pdf]'): {err}"
            ) from None
        HTML(string=page).write_pdf(str(pdf))
    return path
