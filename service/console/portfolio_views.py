"""What the overview and the portfolio pages show, read through the library's public API.

Each function gathers one page's facts into frozen dataclasses (charts already drawn as SVG
text); the routes render them and nothing here knows of HTTP.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass
from datetime import date, timedelta

import pandas as pd

import riskshape.outputs.palette as palette
import riskshape.reviews as reviews
from riskshape import NotFoundError, RiskshapeError, monitor
from riskshape.alerts import trailing_levels
from riskshape.compute import Window
from riskshape.config import Config
from riskshape.explain import representative_cycles
from riskshape.store import AlertRecord, Store, change_marker
from riskshape_service.access import latest_state
from riskshape_service.console import charts
from riskshape_service.snapshots import Snapshots

__all__ = [
    "RuleRow",
    "PortfolioCard",
    "SummaryChart",
    "LoopRow",
    "PortfolioPage",
    "portfolio_card",
    "portfolio_page",
    "open_by_severity",
    "DEFAULT_SUMMARIES",
]

DEFAULT_SUMMARIES = ("mean_correlation", "h0_total_persistence", "h1_landscape_l1")
"""Summaries always drawn on a portfolio page, with every summary a rule watches."""


@dataclass(frozen=True)
class RuleRow:
    """Where one rule stands at the latest window."""

    rule: str
    summary: str
    severity: str
    value: float
    threshold: float
    active: bool
    history: int
    run: int

    @property
    def beyond(self) -> bool:
        """Whether the value is past the threshold at the latest window."""
        return math.isfinite(self.value) and math.isfinite(self.threshold) and self.value > self.threshold


@dataclass(frozen=True)
class PortfolioCard:
    """One portfolio on the overview."""

    name: str
    window_end: date | None
    n_windows: int
    rules: tuple[RuleRow, ...]
    trends: tuple[tuple[str, str], ...]
    """(summary, SVG) of each summary a rule watches, over the latest windows."""
    pending_days: tuple[date, ...] | None


@dataclass(frozen=True)
class SummaryChart:
    """One summary over time, with its rule's threshold and the alerts drawn."""

    summary: str
    rule: str | None
    svg: str
    alerts: int


@dataclass(frozen=True)
class LoopRow:
    """One H1 bar of the latest window and, where found, the assets around its loop."""

    birth: float
    death: float
    assets: tuple[str, ...]


@dataclass(frozen=True)
class PortfolioPage:
    """Everything the portfolio page shows."""

    card: PortfolioCard
    charts: tuple[SummaryChart, ...]
    heatmap: str | None
    heatmap_note: str
    barcode: str | None
    loops: tuple[LoopRow, ...]
    left_out: tuple[str, ...]


def _pending_days(store: Store, name: str) -> tuple[date, ...] | None:
    """Days whose prices are archived but not complete, where the archive tracks them (else None)."""
    reader = getattr(store, "pending_days", None)  # the daily loop's archive tracks them; older ones do not
    if reader is None:
        return None
    try:
        return tuple(reader(name))
    except (RiskshapeError, TypeError):
        return None


def _rule_rows(store: Store, name: str, snapshots: Snapshots) -> tuple[date | None, int, tuple[RuleRow, ...]]:
    state = latest_state(store, name, snapshots, change_marker(store, name))
    rows = tuple(
        RuleRow(
            rule=s.rule,
            summary=s.summary,
            severity=s.severity,
            value=float(s.value),
            threshold=float(s.threshold),
            active=s.active,
            history=s.history,
            run=s.run,
        )
        for s in state.rules
    )
    return state.window_end, state.n_windows, rows


def _marks(frame: pd.DataFrame, alerts: tuple[AlertRecord, ...], rule: str | None) -> list[charts.Mark]:
    positions = {stamp.date(): i for i, stamp in enumerate(frame.index)}
    return [
        charts.Mark(positions[a.window_end], a.severity, f"{a.severity} alert {a.id} ({a.rule}) on {a.window_end}")
        for a in alerts
        if a.window_end in positions and (rule is None or a.rule == rule)
    ]


def _summary_chart(
    frame: pd.DataFrame, config: Config, summary: str, alerts: tuple[AlertRecord, ...], *, small: bool
) -> SummaryChart:
    rule = next((r for r in config.alerts.rules if r.summary == summary), None)
    series = frame[summary]
    threshold = None if rule is None else [float(v) for v in trailing_levels(series, rule).threshold]
    marks = _marks(frame, tuple(a for a in alerts if a.summary == summary), None)
    first = frame.index[0].date().isoformat() if len(frame) else ""
    last = frame.index[-1].date().isoformat() if len(frame) else ""
    title = f"{summary} over {len(frame)} windows" + ("" if rule is None else f", rule {rule.name} threshold dash-dot")
    svg = charts.line_chart(
        [float(v) for v in series],
        title=title,
        first_label=first,
        last_label=last,
        threshold=threshold,
        marks=marks,
        series_mark=palette.summary_mark(summary),
        width=220 if small else 720,
        height=56 if small else 200,
        small=small,
    )
    return SummaryChart(summary=summary, rule=None if rule is None else rule.name, svg=svg, alerts=len(marks))


def _watched(frame: pd.DataFrame, config: Config) -> list[str]:
    ruled = [r.summary for r in config.alerts.rules]
    return [c for c in dict.fromkeys([*ruled, *DEFAULT_SUMMARIES]) if c in frame.columns]


def portfolio_card(store: Store, name: str, snapshots: Snapshots, *, trend_windows: int = 120) -> PortfolioCard:
    """A portfolio's place on the overview: latest window, rules against thresholds, small trends.

    Raises
    ------
    NotFoundError
        If the portfolio is not in the archive.
    """
    window_end, n_windows, rules = _rule_rows(store, name, snapshots)
    snapshot = snapshots.get(store, name, change_marker(store, name))
    frame = snapshot.frame.iloc[-trend_windows:]
    trends: tuple[tuple[str, str], ...] = ()
    if len(frame):
        alerts = store.list_alerts(portfolio=name, since=frame.index[0].date(), limit=None).items
        ruled = [r.summary for r in snapshot.config.alerts.rules if r.summary in frame.columns]
        trends = tuple(
            (s, _summary_chart(frame, snapshot.config, s, alerts, small=True).svg) for s in dict.fromkeys(ruled)
        )
    return PortfolioCard(name, window_end, n_windows, rules, trends, _pending_days(store, name))


def open_by_severity(store: Store, name: str) -> dict[str, int]:
    """Alerts of a portfolio still open, by severity (most severe first; severities without any left out)."""
    page = reviews.list_queue(store, portfolio=name, status="open", limit=None)
    counted: Counter[str] = Counter(item.alert.severity for item in page.items)
    return {word: counted[word] for word in reversed(palette.SEVERITIES) if counted[word]}


def _latest_window(store: Store, name: str, config: Config, window_end: date) -> Window:
    """The latest window as the engine computes it, from the archived prices of that window alone."""
    since = window_end - timedelta(days=3 * config.window + 30)
    prices = store.read_prices(name, start=since, end=window_end).iloc[-(config.window + 1) :]
    result = monitor(prices, config.replace(compute={"executor": "serial"}))
    return result.window(window_end)


def portfolio_page(store: Store, name: str, snapshots: Snapshots) -> PortfolioPage:
    """The portfolio page: summaries over time, the latest window's clusters (heatmap) and loops.

    Raises
    ------
    NotFoundError
        If the portfolio is not in the archive.
    """
    card = portfolio_card(store, name, snapshots)
    snapshot = snapshots.get(store, name, change_marker(store, name))
    frame, config = snapshot.frame, snapshot.config
    if frame.empty or card.window_end is None:
        return PortfolioPage(card, (), None, "no window archived yet", None, (), ())
    alerts = store.list_alerts(portfolio=name, limit=None).items
    drawn = tuple(_summary_chart(frame, config, s, alerts, small=False) for s in _watched(frame, config))
    heat, note, bar_svg = None, "", None
    left_out: tuple[str, ...] = ()
    loops: tuple[LoopRow, ...] = ()
    try:
        window = _latest_window(store, name, config, card.window_end)
        corr, names = window.correlation, window.assets
        left_out = tuple(f"{asset}: {reason}" for asset, reason in window.left_out)
        heat = charts.heatmap(
            corr, names, title=f"correlations of {len(names)} assets in the window ending {card.window_end}"
        )
        note = "rows and columns in single-linkage order: assets that move together sit together"
        cycles = representative_cycles(window.distance, n_loops=3) if len(names) >= 4 else []
        loops = tuple(LoopRow(c.birth, c.death, tuple(names[i] for i in c.points)) for c in cycles)
    except RiskshapeError as err:
        note = f"the latest window could not be rebuilt from the archived prices: {err}"
    try:
        diagram = store.read_diagram(name, card.window_end, 1)
        bar_svg = charts.barcode(
            diagram.bars, title=f"H1 bars of the window ending {card.window_end}: {len(diagram.bars)} loops"
        )
        if not loops:
            loops = tuple(LoopRow(float(b), float(d), ()) for b, d in diagram.bars)
    except NotFoundError:
        bar_svg = None
    return PortfolioPage(card, drawn, heat, note, bar_svg, loops, left_out)
