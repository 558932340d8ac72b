"""Evidence with error bars: the event study's measures with block-bootstrap intervals and a surrogate null.

For each summary column, :func:`evidence_table` runs the event study of
:mod:`riskshape.research.study` (its one definition of a hit, its labels, its alert rules) and
writes what it found as one record per window end, in time order:

* the oriented score and the label (for the ROC AUC);
* the true and the false alerts at that window end (for precision and false alarms per year);
* the events attached to it, each to the last window end before its start: how many are covered,
  covered and hit, hit, and the sum of the hit events' lead times.

Every measure is then a ratio of sums over records (hit rate = covered hits / covered events;
mean lead = lead sum / hits; false alarms per year = false alerts / years of signal; precision;
F1 from precision and hit rate; AUC by the Mann-Whitney rank sum over the labelled records), so
on the records as they are it equals :func:`riskshape.research.study.study_table`, and a block
resample of the records (:mod:`riskshape.research.intervals`, ``arch.bootstrap``) gives its
replicate. Blocks keep the overlap of consecutive windows and the span between an alert and
the event it warns of (the block length should be well above the horizon and the window).

**The surrogate null.** Each column is also replaced by IAAFT surrogates of itself
(:func:`riskshape.research.surrogates.surrogate`, ``"iaaft"``: the column's values exactly, its
spectrum, hence its autocorrelation, approximately; Schreiber and Schmitz 2000) and studied the
same way, alert rule included. A surrogate has the column's persistence and distribution but no
alignment with the events: what it scores is what chance alone scores. ``p_auc_null`` is the
share of surrogates whose AUC reaches the observed one, ``(1 + #{AUC_null >= AUC}) / (n + 1)``.

What it cannot do: with a handful of events, a resample holds a handful of events too, and the
intervals are wide; they describe this history, not the next crisis.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from functools import partial

import numpy as np
import pandas as pd
from scipy.stats import rankdata

from riskshape.config import RuleConfig
from riskshape.errors import ConfigError, ResearchWarning
from riskshape.research.events import DrawdownEvents
from riskshape.research.intervals import BootstrapKind, block_bootstrap, block_rows
from riskshape.research.labels import positions
from riskshape.research.study import EventStudy, _event_study, crisis_direction
from riskshape.research.surrogates import surrogate
from riskshape.types import Direction, FloatArray

__all__ = [
    "evidence_table",
    "evidence_records",
    "evidence_measures",
    "rank_auc",
    "EVIDENCE_MEASURES",
    "default_columns",
]

EVIDENCE_MEASURES: tuple[str, ...] = ("hit_rate", "mean_lead_days", "false_alarms_per_year", "precision", "f1", "auc")
"""The measures :func:`evidence_table` gives with intervals, in its columns' order."""

_RESTS_ON_EVENTS = ("hit_rate", "mean_lead_days", "precision", "f1")
_FIELDS = ("score", "label", "n_true", "n_false", "n_covered", "n_covered_hit", "n_hit", "lead_sum")
_SKIPPED = ("n_assets", "n_left_out", "base_n_assets")


def default_columns(features: pd.DataFrame) -> list[str]:
    """The numeric summary columns of ``features``, without counts (``n_assets``, ``h0_n_bars``, ...).

    Parameters
    ----------
    features : pandas.DataFrame

    Returns
    -------
    list of str

    Examples
    --------
    >>> import pandas as pd
    >>> columns = ["n_assets", "h0_n_bars", "h0_entropy", "base_turbulence"]
    >>> default_columns(pd.DataFrame(0.0, index=[0], columns=columns))
    ['h0_entropy', 'base_turbulence']
    """
    return [
        c
        for c in features.columns
        if c not in _SKIPPED and not c.endswith("n_bars") and pd.api.types.is_numeric_dtype(features[c])
    ]


def evidence_records(study: EventStudy, events: DrawdownEvents) -> FloatArray:
    """One record per window end of an event study (fields in the module notes), in time order.

    Parameters
    ----------
    study : EventStudy
        From :func:`riskshape.research.study.event_study`.
    events : DrawdownEvents
        The events it was run against.

    Returns
    -------
    numpy.ndarray
        (window ends, 8): score, label, true alerts, false alerts, covered events, covered hit
        events, hit events, sum of the hit events' lead days.
    """
    index = pd.DatetimeIndex(study.score.index)
    records = np.zeros((len(index), len(_FIELDS)))
    records[:, 0] = study.score.to_numpy(dtype=float)
    records[:, 1] = study.labels.to_numpy(dtype=float)
    rows = index.get_indexer(pd.DatetimeIndex(study.alerts["window_end"]))
    for field, outcome in ((2, "true"), (3, "false")):
        np.add.at(records[:, field], rows[(study.alerts["outcome"] == outcome).to_numpy() & (rows >= 0)], 1.0)
    cal = events.calendar
    signal_pos = positions(index, cal, f"signal '{study.signal}'")
    for _, event in study.per_event.iterrows():
        row = int(np.searchsorted(signal_pos, cal.get_loc(event["start"]))) - 1
        if row < 0:
            continue  # before the first window end: neither covered nor hit
        covered, hit = bool(event["covered"]), bool(event["hit"])
        records[row, 4] += covered
        records[row, 5] += covered and hit
        records[row, 6] += hit
        records[row, 7] += float(event["lead_days"]) if hit else 0.0
    return records


def _ratio(num: float, den: float) -> float:
    return num / den if den else float("nan")


def rank_auc(score: FloatArray, label: FloatArray) -> float:
    """ROC AUC of ``score`` against 0/1 ``label`` by the Mann-Whitney rank sum (ties at half).

    Rows with a NaN score or label are left out; NaN when one class is absent. Equal to
    ``sklearn.metrics.roc_auc_score`` (tests/research check it), and fast enough to run per resample.

    Returns
    -------
    float
    """
    ok = np.isfinite(score) & np.isfinite(label)
    s, y = score[ok], label[ok]
    n_pos = float((y == 1).sum())
    n_neg = float(len(y) - n_pos)
    if n_pos == 0 or n_neg == 0:
        return float("nan")
    ranks = rankdata(s)
    return float((ranks[y == 1].sum() - n_pos * (n_pos + 1) / 2.0) / (n_pos * n_neg))


def evidence_measures(records: FloatArray, years: float) -> FloatArray:
    """The measures of :data:`EVIDENCE_MEASURES` from records (as they are, or resampled).

    Parameters
    ----------
    records : numpy.ndarray
        From :func:`evidence_records`.
    years : float
        Trading years the records span (false alarms per year).

    Returns
    -------
    numpy.ndarray
        Hit rate, mean lead (days), false alarms per year, precision, F1, AUC (NaN where a ratio
        has nothing under it).
    """
    sums = records[:, 2:].sum(axis=0)
    n_true, n_false, n_covered, n_covered_hit, n_hit, lead_sum = sums
    hit_rate = _ratio(n_covered_hit, n_covered)
    precision = _ratio(n_true, n_true + n_false)
    if np.isnan(hit_rate) or np.isnan(precision):
        f1 = float("nan")
    else:
        f1 = 0.0 if hit_rate + precision == 0 else 2.0 * hit_rate * precision / (hit_rate + precision)
    return np.array(
        [
            hit_rate,
            _ratio(lead_sum, n_hit),
            _ratio(n_false, years),
            precision,
            f1,
            rank_auc(records[:, 0], records[:, 1]),
        ]
    )


def _study(
    signal: pd.Series,
    events: DrawdownEvents,
    rule: RuleConfig | None,
    direction: Direction,
    horizon: int,
    post_event_days: int,
) -> EventStudy:
    return _event_study(
        signal,
        events,
        horizon=horizon,
        lookback=max(horizon, 1),
        alerts=rule,
        direction=direction,
        trend="level",
        variance_window=20,
        exclude_in_event=True,
        post_event_days=post_event_days,
    )


def _null(
    signal: pd.Series,
    events: DrawdownEvents,
    rule: RuleConfig | None,
    direction: Direction,
    horizon: int,
    post_event_days: int,
    n_surrogates: int,
    rng: np.random.Generator,
) -> FloatArray:
    """(n_surrogates, measures) of IAAFT surrogates of ``signal`` (finite values replaced, NaN kept)."""
    finite = np.isfinite(signal.to_numpy(dtype=float))
    out = np.full((n_surrogates, len(EVIDENCE_MEASURES)), np.nan)
    if finite.sum() < 4:
        return out
    values = signal.to_numpy(dtype=float)
    for b in range(n_surrogates):
        fake = values.copy()
        fake[finite] = surrogate(values[finite][:, None], "iaaft", rng)[:, 0]
        study = _study(
            pd.Series(fake, index=signal.index, name=signal.name), events, rule, direction, horizon, post_event_days
        )
        out[b] = evidence_measures(evidence_records(study, events), study.years)
    return out


def evidence_table(
    features: pd.DataFrame,
    events: DrawdownEvents,
    *,
    columns: Sequence[str] | None = None,
    directions: Mapping[str, Direction] | None = None,
    rules: Sequence[RuleConfig] = (),
    horizon: int = 20,
    post_event_days: int = 0,
    n_boot: int = 999,
    block_days: int = 126,
    bootstrap: BootstrapKind = "stationary",
    confidence: float = 0.95,
    n_surrogates: int = 99,
    min_events: int = 3,
    seed: int = 0,
) -> pd.DataFrame:
    """Each column's lead time, hit rate, false alarms per year, precision, F1 and AUC with intervals.

    Parameters
    ----------
    features : pandas.DataFrame
        Summaries indexed by window end (e.g. :func:`riskshape.research.features_with_baselines`).
    events : DrawdownEvents
        Built from the same prices.
    columns : sequence of str, optional
        Default :func:`default_columns`.
    directions, rules, horizon, post_event_days
        As for :func:`riskshape.research.study.study_table` (a column without a rule gets
        :func:`riskshape.research.study.default_rule` in its crisis direction).
    n_boot : int
        Block-bootstrap replicates per column.
    block_days : int
        Block length in trading days (the mean length for the stationary bootstrap); turned into
        window ends with the median spacing of ``features``' index in the events' calendar.
    bootstrap : {"stationary", "moving"}
        See :mod:`riskshape.research.intervals`.
    confidence : float
        Coverage of the percentile intervals.
    n_surrogates : int
        IAAFT surrogates per column for the null (0: none).
    min_events : int
        Fewer covered events than this and the intervals of the measures that rest on events
        (hit rate, mean lead, precision, F1) are NaN: a resample holds each event or not, so with
        one event the interval is a point (``[1, 1]`` for a hit) and says nothing. Likewise the
        mean lead's interval with fewer hit events than this. The point estimates stay.
    seed : int
        Seeds the bootstrap and the surrogates (one stream per column, in order).

    Returns
    -------
    pandas.DataFrame
        One row per column (index ``signal``): ``direction``, ``events``, ``covered``, ``alerts``;
        for each measure ``m`` of :data:`EVIDENCE_MEASURES`: ``m``, ``m_low``, ``m_high``;
        ``p_auc`` (bootstrap, AUC > 0.5), ``n_boot_auc`` (replicates with both labels);
        ``auc_null_median``, ``auc_null_q95``, ``f1_null_median``, ``p_auc_null`` (surrogates;
        NaN when ``n_surrogates`` is 0); and the settings: ``horizon``, ``block_days``,
        ``block_rows``, ``bootstrap``, ``n_boot``, ``n_surrogates``, ``confidence``, ``min_events``.

    Raises
    ------
    ConfigError
        For a column not in ``features`` or a bad setting.

    Examples
    --------
    A signal that rises in the five days before each of three invented events: its AUC is 1
    and every resample that holds both labels agrees:

    >>> import numpy as np, pandas as pd
    >>> from riskshape.config import RuleConfig
    >>> from riskshape.research import events_from_periods
    >>> days = pd.bdate_range("2031-01-01", periods=300)
    >>> starts = [80, 160, 240]
    >>> periods = pd.DataFrame({"start": days[starts], "end": days[[s + 10 for s in starts]]})
    >>> events = events_from_periods(periods, pd.Series(1.0, index=days))
    >>> x = np.zeros(300)
    >>> for s in starts:
    ...     x[s - 5 : s] = 1.0
    >>> rule = RuleConfig(name="up", summary="x", kind="level", threshold=0.5, min_history=0)
    >>> table = evidence_table(pd.DataFrame({"x": x}, index=days), events, rules=[rule], horizon=5,
    ...                        n_boot=50, block_days=40, n_surrogates=0)
    >>> table.loc["x", ["auc", "auc_low", "auc_high", "hit_rate", "mean_lead_days"]].tolist()
    [1.0, 1.0, 1.0, 1.0, 5.0]
    """
    chosen = list(columns) if columns is not None else default_columns(features)
    missing = [c for c in chosen if c not in features.columns]
    if missing:
        raise ConfigError(
            f"evidence_table: columns {missing} are not in the features; available: {list(features.columns)}"
        )
    if n_surrogates < 0:
        raise ConfigError(f"evidence_table: n_surrogates must be 0 or more, got {n_surrogates}")
    spacing = np.diff(positions(pd.DatetimeIndex(features.index), events.calendar, "features"))
    step_days = float(np.median(spacing)) if len(spacing) else 1.0
    block = block_rows(block_days, step_days)
    by_summary = {rule.summary: rule for rule in rules}
    streams = np.random.default_rng(seed).spawn(len(chosen))
    rows = []
    for col, rng in zip(chosen, streams):
        direction = crisis_direction(col, directions)
        signal = features[col].astype(float)
        rule = by_summary.get(col)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ResearchWarning)  # a NaN is reported by the table itself
            study = _study(signal, events, rule, direction, horizon, post_event_days)
            records = evidence_records(study, events)
            boot = block_bootstrap(
                records,
                partial(evidence_measures, years=study.years),
                n_boot=n_boot,
                block=block,
                kind=bootstrap,
                seed=rng,
            )
            null = _null(signal, events, rule, direction, horizon, post_event_days, n_surrogates, rng)
        low, high = boot.interval(confidence)
        thin = list(_RESTS_ON_EVENTS) if study.n_covered < min_events else []
        if int(study.per_event["hit"].sum()) < min_events:
            thin.append("mean_lead_days")  # a mean over fewer hits than that is a point, not an interval
        for measure in thin:
            low[EVIDENCE_MEASURES.index(measure)] = high[EVIDENCE_MEASURES.index(measure)] = np.nan
        row: dict[str, object] = {
            "direction": direction,
            "events": len(study.per_event),
            "covered": study.n_covered,
            "alerts": len(study.alerts),
        }
        for j, measure in enumerate(EVIDENCE_MEASURES):
            row[measure], row[f"{measure}_low"], row[f"{measure}_high"] = boot.estimate[j], low[j], high[j]
        auc_index = EVIDENCE_MEASURES.index("auc")
        row["p_auc"] = float(boot.p_above(0.5)[auc_index])
        row["n_boot_auc"] = int(boot.n_finite[auc_index])
        null_auc = null[:, auc_index]
        null_auc = null_auc[np.isfinite(null_auc)]
        has_null = len(null_auc) > 0 and np.isfinite(boot.estimate[auc_index])
        row["auc_null_median"] = float(np.median(null_auc)) if len(null_auc) else np.nan
        row["auc_null_q95"] = float(np.quantile(null_auc, 0.95)) if len(null_auc) else np.nan
        null_f1 = null[:, EVIDENCE_MEASURES.index("f1")]
        row["f1_null_median"] = float(np.nanmedian(null_f1)) if np.isfinite(null_f1).any() else np.nan
        row["p_auc_null"] = (
            float((1 + (null_auc >= boot.estimate[auc_index]).sum()) / (len(null_auc) + 1)) if has_null else np.nan
        )
        row.update(
            horizon=horizon,
            block_days=block_days,
            block_rows=block,
            bootstrap=bootstrap,
            n_boot=n_boot,
            n_surrogates=n_surrogates,
            confidence=confidence,
            min_events=min_events,
        )
        rows.append(pd.Series(row, name=col))
    table = pd.DataFrame(rows).infer_objects()
    table.index.name = "signal"
    return table
