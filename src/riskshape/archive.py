"""Archive a monitoring run into the store, and reproduce archived alerts from the archive alone.

:func:`archive_run` stores the run's prices (corrections where they differ from what is archived),
its manifest, features, diagrams, and appends the alerts its rules raise (idempotently: a second
run over the same data adds nothing; a run over new days adds only what is new), all in one write
transaction that ends with the run's chained commitment: a reader sees the whole run or none of it.

:func:`recompute_run` is the one way back from the archive to a run's windows: it reads the
prices the run saw and its configuration and recomputes the windows up to a date through
:func:`riskshape.monitor` (the review report uses it for explanations the archive does not hold).

:func:`reproduce_alert` recomputes the run with it and re-decides the rule with
:func:`riskshape.alerts.rules.recheck_firing`; it confirms the archived value, threshold, window
inputs hash and decision.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from datetime import datetime, timezone

import pandas as pd

from riskshape.alerts.model import Alert, Firing
from riskshape.alerts.rules import evaluate_rules, recheck_firing
from riskshape.compute.monitor import MonitorResult, monitor
from riskshape.config import ComputeConfig, Config
from riskshape.errors import ConfigError, RiskshapeError
from riskshape.explain.archived import explanation_json
from riskshape.prices import hash_prices
from riskshape.store import AlertAppend, AlertRecord, Run, RunManifest, Store, WriteCount
from riskshape.store.database import fault_point

__all__ = [
    "RunReport",
    "Check",
    "ReproduceReport",
    "Recomputation",
    "archive_run",
    "alerts_for",
    "recompute_run",
    "reproduce_alert",
    "reproduce_alerts",
    "VALUE_RTOL",
    "VALUE_ATOL",
]

VALUE_RTOL = 1e-5
"""Relative tolerance on a recomputed value: diagrams come from float32 Rips filtrations (float32
epsilon is 1.2e-7), and summaries add up many bars, so agreement to ~1e-5 is float32-level."""
VALUE_ATOL = 1e-7
"""Absolute tolerance on a recomputed value, for values near zero."""


def alerts_for(
    portfolio: str,
    firings: Sequence[Firing],
    result: MonitorResult,
    config_hash: str,
    raised_at: datetime,
    *,
    explain: bool = True,
) -> list[Alert]:
    """The alerts to archive for ``firings`` of a run: each with its window's inputs hash, the
    package version and (with ``explain``) its explanation, all taken from ``result``.

    The one place a firing becomes an archived alert, for whole runs (:func:`archive_run`) and
    daily tail runs (:func:`riskshape.daily.tail_run.archive_tail_run`).
    """
    return [
        Alert(
            portfolio=portfolio,
            firing=f,
            raised_at=raised_at,
            config_hash=config_hash,
            inputs_hash=result.window_inputs_hash(f.window_end),
            package_version=result.package_version,
            explanation=explanation_json(result, f) if explain else None,
        )
        for f in firings
    ]


@dataclass(frozen=True)
class RunReport:
    """What :func:`archive_run` stored."""

    run: Run
    features: WriteCount
    diagrams: WriteCount
    alerts: AlertAppend


@dataclass(frozen=True)
class Check:
    """One comparison of :func:`reproduce_alert`: what the archive says against what was recomputed."""

    name: str
    ok: bool
    archived: str
    recomputed: str


@dataclass(frozen=True)
class ReproduceReport:
    """Outcome of reproducing one alert: ``ok`` when every check passed (``exact`` if the value and
    threshold came out bit-identical).

    Examples
    --------
    >>> checks = (
    ...     Check("window inputs hash", True, "9f2c", "9f2c"),
    ...     Check("value", False, "0.8125", "0.9"),
    ... )
    >>> report = ReproduceReport(alert_id=7, ok=False, exact=False, checks=checks)
    >>> [(c.name, c.archived, c.recomputed) for c in report.failed]
    [('value', '0.8125', '0.9')]
    """

    alert_id: int
    ok: bool
    exact: bool
    checks: tuple[Check, ...]

    @property
    def failed(self) -> tuple[Check, ...]:
        """The checks that did not pass."""
        return tuple(c for c in self.checks if not c.ok)


def archive_run(
    store: Store,
    portfolio: str,
    result: MonitorResult,
    config: Config | None = None,
    *,
    source: str | None = None,
    raised_at: datetime | None = None,
    explain: bool = True,
    with_run: Callable[[Run], object] | None = None,
) -> RunReport:
    """Write a monitoring run into the archive and append the alerts its rules raise.

    Idempotent: windows already archived for this configuration keep their features and diagrams
    (features are compared and differences counted; diagrams of such windows are not even looked
    up), alerts already archived are not added again.

    Parameters
    ----------
    store : Store
    portfolio : str
        Portfolio name (created if new).
    result : MonitorResult
        The run.
    config : Config, optional
        The configuration whose rules are evaluated; defaults to ``result.config`` and must hash
        like it (``compute`` may differ).
    source : str, optional
        Where the prices came from, kept in the manifest.
    raised_at : datetime, optional
        When the alerts are raised (UTC); defaults to now.
    explain : bool
        Archive each new alert's explanation (:mod:`riskshape.explain`) inside its record.
    with_run : callable, optional
        Further writes that belong with the run (the daily loop's day state), called with the new
        run inside the run's transaction: they commit with it or not at all.

    Returns
    -------
    RunReport

    Raises
    ------
    ConfigError
        If ``config`` differs from the configuration the result was computed with.
    StoreError, DataError
        If the archive refuses the write or the prices fail validation.
    """
    config = config or result.config
    if config.hash() != result.config.hash():
        raise ConfigError(
            f"archive_run: the configuration given (hash {config.hash()[:12]}) is not the one the result was "
            f"computed with (hash {result.config.hash()[:12]}); pass result.config or run monitor again"
        )
    manifest = RunManifest(
        config=config.to_mapping(),
        config_hash=config.hash(),
        input_hash=result.input_hash,
        package_version=result.package_version,
        source=source,
    )
    # Reads and rule evaluation first, outside the write lock; the writes below are idempotent, so a
    # run archived by another writer in between only turns these into "existing" counts.
    known = any(p.name == portfolio for p in store.list_portfolios())
    held = set(store.window_ends(portfolio, manifest.config_hash)) if known else set()
    stamp = (raised_at or datetime.now(timezone.utc)).astimezone(timezone.utc)
    archived = (
        {
            (a.rule, a.window_end)
            for a in store.list_alerts(portfolio=portfolio, limit=None).items
            if a.config_hash == manifest.config_hash
        }
        if known
        else set()
    )
    firings = evaluate_rules(result.features, config.alerts.rules)
    new = [f for f in firings if (f.rule, f.window_end.date()) not in archived]
    alerts = alerts_for(portfolio, new, result, manifest.config_hash, stamp, explain=explain)
    dims = range(config.maxdim + 1)
    fresh = [end for end in result.window_ends if end.date() not in held]
    # One transaction: the run's prices, manifest, features, diagrams, alerts and its commitment are
    # seen together or not at all (a crash anywhere inside leaves nothing of the run).
    with store.transaction():
        store.ensure_portfolio(portfolio)
        fault_point("archive_run:portfolio")
        run = store.create_run(portfolio, manifest, result.prices)
        fault_point("archive_run:run")
        features = store.write_features(run.id, result.features)
        fault_point("archive_run:features")
        written = store.write_diagrams(run.id, ((end, k, result.diagram(end, k)) for end in fresh for k in dims))
        fault_point("archive_run:diagrams")
        appended = store.append_alerts(alerts, run.id)
        fault_point("archive_run:alerts")
        if with_run is not None:
            with_run(run)
    skipped = (len(result.window_ends) - len(fresh)) * len(dims)  # archived already: kept, not compared
    diagrams = WriteCount(added=written.added, existing=written.existing + skipped, differing=written.differing)
    already = appended.existing + len(firings) - len(new)  # found archived before explaining them
    return RunReport(
        run=run, features=features, diagrams=diagrams, alerts=AlertAppend(added=appended.added, existing=already)
    )


@dataclass(frozen=True)
class Recomputation:
    """A run's windows recomputed from the archive (see :func:`recompute_run`).

    Attributes
    ----------
    run : Run
        The archived run.
    config : Config or None
        Its configuration as read back (``compute`` replaced if asked); None if it does not read.
    checks : tuple of Check
        The configuration reads, it hashes to the run's configuration hash, and the archived
        prices hash to the run's input hash.
    result : MonitorResult or None
        The windows up to the date asked for; None if they were not recomputed.
    failure : str or None
        Why the monitor refused the archived prices, if it did.
    """

    run: Run
    config: Config | None
    checks: tuple[Check, ...]
    result: MonitorResult | None
    failure: str | None

    @property
    def consistent(self) -> bool:
        """Whether the configuration reads and it and the prices hash to what the run recorded."""
        return all(c.ok for c in self.checks)

    @property
    def reason(self) -> str:
        """Why there is no result (the monitor's refusal, or the first failed check); empty if there is one."""
        if self.result is not None:
            return ""
        if self.failure is not None:
            return self.failure
        failed = next((c for c in self.checks if not c.ok), None)
        return failed.recomputed if failed is not None else ""


def recompute_run(
    store: Store,
    run: Run,
    upto: object,
    *,
    compute: ComputeConfig | None = None,
    require_hashes: bool = True,
) -> Recomputation:
    """Recompute a run's windows up to ``upto`` from its archived prices and configuration.

    Reads the prices as of the run (later corrections left out) and the run's configuration,
    checks that the prices the run read (from its first date: a run of the daily loop reads a
    tail) hash to what the run recorded, and runs :func:`riskshape.monitor` over the portfolio's
    prices from its first date up to ``upto`` (the windows are anchored there).

    Parameters
    ----------
    store : Store
    run : Run
        The archived run (``store.get_run``).
    upto : date-like
        Last date of the prices used (the latest window end of interest).
    compute : ComputeConfig, optional
        Where to compute (never changes a result); defaults to the run's own compute settings.
    require_hashes : bool
        Recompute only when the configuration and the prices hash to what the run recorded
        (default); ``False`` recomputes whenever the configuration reads.

    Returns
    -------
    Recomputation
        With ``result`` None when the configuration does not read, a hash differs (with
        ``require_hashes``), or the monitor refuses the prices (``failure`` says why).

    Raises
    ------
    StoreError
        If the archive cannot be read.
    """
    checks: list[Check] = []
    config: Config | None = None
    try:
        config = Config.from_mapping(run.config, where=f"run {run.id} configuration")
    except ConfigError as err:
        checks.append(Check("configuration readable", False, "the run's configuration", str(err)))
    if config is not None:
        again = config.hash()
        checks.append(Check("configuration hash", again == run.config_hash, run.config_hash, again))
        if compute is not None:
            config = config.replace(compute=compute)
    # from the portfolio's first date: a run of the daily loop (or a correction's) read only a tail of
    # the history, and its input hash covers that tail; its windows are anchored at the first date
    history = store.read_prices(run.portfolio, end=run.last_date, assets=run.assets, as_of_run=run.id)
    prices = history.loc[pd.Timestamp(run.first_date) :] if run.first_date is not None else history
    archived_hash = hash_prices(prices)
    checks.append(Check("run prices hash", archived_hash == run.input_hash, run.input_hash, archived_hash))
    result: MonitorResult | None = None
    failure: str | None = None
    if config is not None and (not require_hashes or all(c.ok for c in checks)):
        try:
            result = monitor(history.loc[: pd.Timestamp(upto)], config)
        except RiskshapeError as err:
            failure = str(err)
    return Recomputation(run=run, config=config, checks=tuple(checks), result=result, failure=failure)


def _close(archived: float, recomputed: float) -> bool:
    return math.isclose(archived, recomputed, rel_tol=VALUE_RTOL, abs_tol=VALUE_ATOL)


def _checks_for(
    alert: AlertRecord, config: Config, result: MonitorResult | None, failure: str | None
) -> ReproduceReport:
    checks: list[Check] = []
    rule = next((r for r in config.alerts.rules if r.name == alert.rule), None)
    checks.append(
        Check(
            "rule in the run's configuration",
            rule is not None,
            alert.rule,
            alert.rule if rule is not None else "absent",
        )
    )
    if result is None or rule is None:
        if failure is not None:
            checks.append(Check("recomputation", False, "windows up to the alert", failure))
        return ReproduceReport(alert.id, ok=False, exact=False, checks=tuple(checks))
    end = pd.Timestamp(alert.window_end)
    inputs = result.window_inputs_hash(end)
    checks.append(Check("window inputs hash", inputs == alert.inputs_hash, alert.inputs_hash, inputs))
    firing = recheck_firing(result.features, rule, end)
    checks.append(Check("decision", firing is not None, "fires", "fires" if firing is not None else "does not fire"))
    exact = False
    if firing is not None:
        pairs = (("value", alert.value, firing.value), ("threshold", alert.threshold, firing.threshold))
        for name, archived, again in pairs:
            checks.append(Check(name, _close(archived, again), repr(archived), repr(again)))
        exact = firing.value == alert.value and firing.threshold == alert.threshold
        for name in ("summary", "kind", "severity"):
            archived_text, again_text = getattr(alert, name), getattr(firing, name)
            checks.append(Check(name, archived_text == again_text, archived_text, again_text))
    ok = all(c.ok for c in checks)
    return ReproduceReport(alert.id, ok=ok, exact=ok and exact, checks=tuple(checks))


def reproduce_alerts(
    store: Store, alert_ids: Sequence[int], compute: ComputeConfig | None = None
) -> tuple[ReproduceReport, ...]:
    """Reproduce several alerts, recomputing each run once (up to its latest alert's window).

    Parameters
    ----------
    store : Store
    alert_ids : sequence of int
    compute : ComputeConfig, optional
        Where to compute (never changes a result); defaults to the run's own compute settings.

    Returns
    -------
    tuple of ReproduceReport
        In the order of ``alert_ids``.

    Raises
    ------
    NotFoundError
        If an alert or its run is not in the archive.
    """
    alerts = [store.get_alert(i).alert for i in alert_ids]
    by_run: dict[int, list[AlertRecord]] = {}
    for alert in alerts:
        by_run.setdefault(alert.run_id, []).append(alert)
    reports: dict[int, ReproduceReport] = {}
    for run_id, group in by_run.items():
        run = store.get_run(run_id)
        last = max(pd.Timestamp(a.window_end) for a in group)
        again = recompute_run(store, run, last, compute=compute)
        for alert in group:
            own = Check(
                "alert configuration hash", alert.config_hash == run.config_hash, alert.config_hash, run.config_hash
            )
            report = _checks_for(alert, again.config or Config(), again.result, again.failure)
            checks = again.checks + (own,) + report.checks
            ok = all(c.ok for c in checks)
            reports[alert.id] = ReproduceReport(alert.id, ok=ok, exact=ok and report.exact, checks=checks)
    return tuple(reports[i] for i in alert_ids)


def reproduce_alert(store: Store, alert_id: int, compute: ComputeConfig | None = None) -> ReproduceReport:
    """Recompute one archived alert from the archive alone and compare.

    Reads the prices as of the alert's run (later corrections left out) and the run's
    configuration, recomputes the windows up to the alert's window with :func:`recompute_run`,
    and re-decides the rule with :func:`riskshape.alerts.rules.recheck_firing`. Checks: the
    configuration hashes, the archived prices hash to the run's input hash, the window's inputs
    hash, the decision (it fires), the value and threshold (within :data:`VALUE_RTOL` /
    :data:`VALUE_ATOL`), summary, kind and severity.

    Parameters
    ----------
    store : Store
    alert_id : int
    compute : ComputeConfig, optional
        Where to compute; defaults to the run's own compute settings.

    Returns
    -------
    ReproduceReport

    Raises
    ------
    NotFoundError
        If the alert is not in the archive.
    """
    return reproduce_alerts(store, [alert_id], compute)[0]
