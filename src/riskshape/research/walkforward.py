"""Does topology add anything? Out-of-sample walk-forward comparison of feature sets.

For each feature set (e.g. baselines only, baselines plus topological summaries) a logistic
regression (scikit-learn, features standardised on the training rows; an L2 penalty, or an L1
one that keeps few columns) predicts "a drawdown event starts within the next ``H`` trading
days" at each window end. :func:`nested_feature_sets` builds the usual comparison: the base
set, the base set plus one added column at a time, and the base set plus them all.

What it can and cannot tell: a drawdown history holds few events, and a logistic regression
with many collinear columns and a handful of events fits noise. :func:`walk_forward` warns
(:class:`riskshape.errors.ResearchWarning`) when a feature set has fewer than
``events_per_column`` events known at its last training per column (one by default: more
columns than events; clinical rules of thumb ask for about ten, Peduzzi et al. 1996,
J. Clinical Epidemiology 49(12):1373, from memory), and says why each NaN score is NaN (a fold
whose training or test windows hold one class only, a constant column).

No look-ahead, by construction:

* the windows after the first ``min_train`` are cut into ``n_folds`` consecutive test folds;
* a fold whose first window ends on day ``T`` is predicted by a model trained at ``T``, on
  events found in the wealth path **up to T only** (``drawdown_events(wealth[:T])``: an event
  exists once its depth has been reached by ``T``) and on the windows whose label is known at
  ``T`` (ending at ``t <= T - H``, or already followed by a known event start);
* features at a window end use nothing after it (the monitor's windows are causal).

So changing prices or features after any day leaves every prediction made before it unchanged
(tests/research check this by perturbing the future). Folds are then scored against the labels
of the events of the whole path: ROC AUC and Brier score (``sklearn.metrics``) per fold and
pooled over all out-of-sample predictions.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import pandas as pd
import sklearn
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import brier_score_loss, roc_auc_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from riskshape.errors import ConfigError, ResearchWarning
from riskshape.research.events import drawdown_events
from riskshape.research.labels import event_labels
from riskshape.types import FloatArray, IntArray

__all__ = ["WalkForward", "walk_forward", "nested_feature_sets"]

# scikit-learn 1.8 names the L1 fit l1_ratio = 1 and deprecates `penalty`; earlier releases need penalty = "l1"
_L1: dict[str, Any] = (
    {"l1_ratio": 1.0} if tuple(int(p) for p in sklearn.__version__.split(".")[:2]) >= (1, 8) else {"penalty": "l1"}
)


def nested_feature_sets(base: Sequence[str], added: Sequence[str], *, base_name: str = "base") -> dict[str, list[str]]:
    """The base set, the base set plus each added column alone, and the base set plus them all.

    Parameters
    ----------
    base : sequence of str
        Columns every set holds (e.g. the baselines).
    added : sequence of str
        Candidate columns (e.g. topological summaries).
    base_name : str
        Name of the base set; the others are ``<base_name>+<column>`` and ``<base_name>+all``.

    Returns
    -------
    dict of str to list of str
        For the ``models`` argument of :func:`walk_forward`.

    Examples
    --------
    >>> sets = nested_feature_sets(["ew_volatility"], ["h0_entropy", "h1_landscape_l1"])
    >>> list(sets)
    ['base', 'base+h0_entropy', 'base+h1_landscape_l1', 'base+all']
    >>> sets["base+all"]
    ['ew_volatility', 'h0_entropy', 'h1_landscape_l1']
    """
    sets = {base_name: list(base)}
    for column in added:
        sets[f"{base_name}+{column}"] = [*base, column]
    if len(added) > 1:
        sets[f"{base_name}+all"] = [*base, *added]
    return sets


@dataclass(frozen=True)
class WalkForward:
    """Out-of-sample predictions and scores of each feature set.

    Attributes
    ----------
    models : tuple of str
        Names of the feature sets, in the order given.
    folds : pandas.DataFrame
        One row per fold: ``fold``, ``trained_until``, ``test_start``, ``test_end``,
        ``n_train``, ``n_train_positive``, ``n_train_events``, ``n_test``, ``n_test_positive``,
        then ``auc_<model>`` and ``brier_<model>`` for each model, and ``notes``: why a score of
        the fold is NaN or a column carried nothing ("" when all is well).
    predictions : pandas.DataFrame
        Indexed by window end (test rows only): ``fold``, ``label`` (final, NaN = unknown or
        inside an event) and ``p_<model>``, the predicted probability (NaN where the model could
        not be trained: one class only in its training rows, or features missing).
    n_columns : mapping of str to int
        Columns of each model.
    """

    models: tuple[str, ...]
    folds: pd.DataFrame
    predictions: pd.DataFrame
    n_columns: Mapping[str, int]

    def table(self) -> pd.DataFrame:
        """Per model: pooled out-of-sample AUC and Brier score, and the mean fold AUC.

        Returns
        -------
        pandas.DataFrame
            Index: the models; columns ``pooled_auc``, ``pooled_brier``, ``mean_fold_auc``,
            ``n_scored``, ``n_columns``.
        """
        rows = {}
        for name in self.models:
            scored = self.predictions[["label", f"p_{name}"]].dropna()
            y, p = scored["label"].to_numpy(), scored[f"p_{name}"].to_numpy()
            rows[name] = {
                "pooled_auc": _auc(y, p),
                "pooled_brier": float(brier_score_loss(y, p)) if len(y) else float("nan"),
                "mean_fold_auc": float(self.folds[f"auc_{name}"].mean()),
                "n_scored": int(len(y)),
                "n_columns": int(self.n_columns.get(name, 0)),
            }
        return pd.DataFrame.from_dict(rows, orient="index")


def _auc(y: IntArray, p: FloatArray) -> float:
    return float(roc_auc_score(y, p)) if len(np.unique(y)) == 2 else float("nan")


def walk_forward(
    features: pd.DataFrame,
    wealth: pd.Series,
    models: Mapping[str, Sequence[str]],
    *,
    min_depth: float = 0.1,
    max_duration: int | None = None,
    horizon: int = 20,
    n_folds: int = 5,
    min_train: int = 250,
    regularization: float = 1.0,
    penalty: Literal["l2", "l1"] = "l2",
    events_per_column: float = 1.0,
    exclude_in_event: bool = True,
    post_event_days: int = 0,
) -> WalkForward:
    """Walk-forward logistic regression of "event within ``horizon`` days" for each feature set.

    Parameters
    ----------
    features : pandas.DataFrame
        Causal features indexed by window end (days of ``wealth``'s index), e.g. the monitor's
        features joined with :func:`riskshape.research.baselines.compute_baselines`.
    wealth : pandas.Series
        The portfolio's wealth path (:func:`riskshape.research.events.equal_weight_wealth`);
        events come from it as in :func:`riskshape.research.events.drawdown_events`.
    models : mapping of str to sequence of str
        Feature set name -> columns, e.g. ``{"baselines": [...], "baselines+topology": [...]}``.
    min_depth, max_duration
        Event definition (see :func:`riskshape.research.events.drawdown_events`).
    horizon : int
        ``H``, trading days.
    n_folds : int
        Consecutive test folds after the first ``min_train`` windows.
    min_train : int
        Windows before the first test fold.
    regularization : float
        Inverse penalty strength ``C`` of the logistic regression.
    penalty : {"l2", "l1"}
        ``l1`` gives a sparse fit (scikit-learn's liblinear solver): with few events and many
        collinear columns it keeps few of them.
    events_per_column : float
        Warn when a model has fewer events known at its last training than this many per
        column (1: more columns than events; 10 is the stricter clinical rule of thumb).
    exclude_in_event, post_event_days
        See :func:`riskshape.research.study.event_labels`.

    Returns
    -------
    WalkForward

    Raises
    ------
    ConfigError
        If a column is missing, no model is given, or there are too few windows for the folds.

    Warns
    -----
    ResearchWarning
        When a model has more columns than the events known at its last training allow
        (``events_per_column`` each), and when a score is NaN (with the reason).

    Examples
    --------
    Two invented drawdowns (peaks on days 15 and 50) and a feature that rises in the three days
    before each. The first fold trains at day 40, knowing only the first event; the second
    event's warning days fall in its test rows:

    >>> import numpy as np
    >>> import pandas as pd
    >>> days = pd.bdate_range("2031-01-06", periods=80)
    >>> steps = np.full(80, 0.01)
    >>> steps[[16, 17, 18, 51, 52, 53]] = -0.05
    >>> wealth = pd.Series(np.exp(np.cumsum(steps)), index=days)
    >>> rng = np.random.default_rng(5)
    >>> stress = np.zeros(80)
    >>> stress[[12, 13, 14, 47, 48, 49]] = 1.0
    >>> features = pd.DataFrame(
    ...     {"noise": rng.normal(size=80), "stress": stress + 0.1 * rng.normal(size=80)}, index=days
    ... )
    >>> models = {"noise": ["noise"], "noise+stress": ["noise", "stress"]}
    >>> import warnings
    >>> with warnings.catch_warnings(record=True) as said:  # fold 1's test rows hold no event: it says so
    ...     warnings.simplefilter("always")
    ...     wf = walk_forward(features, wealth, models, horizon=3, n_folds=2, min_train=40)
    >>> any("one class only" in str(w.message) for w in said)
    True
    >>> wf.folds[["trained_until", "n_train_positive", "n_test", "n_test_positive"]]
      trained_until  n_train_positive  n_test  n_test_positive
    0    2031-03-03                 3      16                3
    1    2031-03-31                 6      17                0
    >>> scores = wf.table().loc["noise+stress"]
    >>> float(scores["pooled_auc"]), int(scores["n_scored"])
    (1.0, 33)
    """
    if penalty not in ("l2", "l1"):
        raise ConfigError(f"walk_forward: penalty must be 'l2' or 'l1', got {penalty!r}")
    if not models:
        raise ConfigError("walk_forward: give at least one feature set in models")
    for name, cols in models.items():
        missing = [c for c in cols if c not in features.columns]
        if missing or not cols:
            raise ConfigError(
                f"walk_forward: feature set '{name}' names columns {missing or '(none)'} that are not in the "
                f"features; available: {list(features.columns)}"
            )
    n_rows = len(features)
    if n_folds < 1 or min_train < 1 or n_rows - min_train < n_folds:
        raise ConfigError(
            f"walk_forward: {n_rows} windows cannot give {n_folds} test folds after min_train={min_train}; "
            "lower min_train or n_folds, or use more data"
        )
    calendar = pd.DatetimeIndex(wealth.index)
    final_events = drawdown_events(wealth, min_depth, max_duration)
    final_labels = event_labels(
        features.index, final_events, horizon, exclude_in_event=exclude_in_event, post_event_days=post_event_days
    )
    bounds = np.linspace(min_train, n_rows, n_folds + 1).round().astype(int)
    fold_rows, predictions = [], []
    for k in range(n_folds):
        test = features.iloc[bounds[k] : bounds[k + 1]]
        now = calendar.get_loc(test.index[0])
        known_events = drawdown_events(wealth.iloc[: now + 1], min_depth, max_duration)
        past = features.iloc[: bounds[k]]
        past = past[past.index <= calendar[now]]
        train_labels = event_labels(
            past.index, known_events, horizon, exclude_in_event=exclude_in_event, post_event_days=post_event_days
        )
        out = pd.DataFrame({"fold": k, "label": final_labels.loc[test.index]}, index=test.index)
        row: dict[str, object] = {
            "fold": k,
            "trained_until": calendar[now],
            "test_start": test.index[0],
            "test_end": test.index[-1],
            "n_train": int(train_labels.notna().sum()),
            "n_train_positive": int((train_labels == 1).sum()),
            "n_train_events": len(known_events.table),
            "n_test": int(out["label"].notna().sum()),
            "n_test_positive": int((out["label"] == 1).sum()),
        }
        notes = []
        if out["label"].nunique() < 2:
            notes.append(f"its test windows hold one class only ({row['n_test_positive']} of {row['n_test']} positive)")
        for name, cols in models.items():
            p, note = _fit_predict(past[list(cols)], train_labels, test[list(cols)], regularization, penalty)
            if note:
                notes.append(f"{name}: {note}")
            out[f"p_{name}"] = p
            scored = out[["label", f"p_{name}"]].dropna()
            row[f"auc_{name}"] = _auc(scored["label"].to_numpy(), scored[f"p_{name}"].to_numpy())
            row[f"brier_{name}"] = (
                float(brier_score_loss(scored["label"], scored[f"p_{name}"])) if len(scored) else float("nan")
            )
        row["notes"] = "; ".join(notes)
        fold_rows.append(row)
        predictions.append(out)
    folds = pd.DataFrame(fold_rows)
    _warn(folds, {name: len(cols) for name, cols in models.items()}, events_per_column)
    return WalkForward(
        models=tuple(models),
        folds=folds,
        predictions=pd.concat(predictions),
        n_columns={name: len(cols) for name, cols in models.items()},
    )


def _warn(folds: pd.DataFrame, n_columns: Mapping[str, int], events_per_column: float) -> None:
    """One ResearchWarning: models with too many columns for the events, and each fold's notes."""
    events = int(folds["n_train_events"].max())
    crowded = [f"{name} ({n} columns)" for name, n in n_columns.items() if events < events_per_column * n]
    lines = []
    if crowded:
        lines.append(
            f"{events} events known at the last training, fewer than {events_per_column:g} per column for "
            f"{', '.join(crowded)}: such fits tend to learn noise; use fewer columns, penalty='l1', "
            "or a longer history"
        )
    lines += [f"fold {fold}: {note}" for fold, note in zip(folds["fold"], folds["notes"]) if note]
    if lines:
        warnings.warn("walk_forward: " + "; ".join(lines), ResearchWarning, stacklevel=3)


def _fit_predict(
    train_x: pd.DataFrame,
    train_y: pd.Series,
    test_x: pd.DataFrame,
    regularization: float,
    penalty: Literal["l2", "l1"],
) -> tuple[FloatArray, str]:
    """Fitted probabilities on ``test_x`` and a note ("" if none).

    NaN where a row has a missing feature, or everywhere when the training rows hold one class.
    """
    usable = train_y.notna() & np.isfinite(train_x.to_numpy(dtype=float)).all(axis=1)
    x, y = train_x[usable].to_numpy(dtype=float), train_y[usable].to_numpy()
    out = np.full(len(test_x), np.nan)
    if len(np.unique(y)) < 2:
        return out, f"not trained: its {len(y)} usable training windows hold one class only"
    constant = [c for c, spread in zip(train_x.columns, np.ptp(x, axis=0)) if spread == 0.0]
    note = f"column(s) {constant} constant in the training windows carry nothing" if constant else ""
    if penalty == "l1":
        classifier = LogisticRegression(C=regularization, solver="liblinear", max_iter=1000, **_L1)
    else:
        classifier = LogisticRegression(C=regularization, max_iter=1000)
    model = make_pipeline(StandardScaler(), classifier)
    model.fit(x, y)
    test_values = test_x.to_numpy(dtype=float)
    ok = np.isfinite(test_values).all(axis=1)
    if ok.any():
        out[ok] = model.predict_proba(test_values[ok])[:, 1]
    return out, note
