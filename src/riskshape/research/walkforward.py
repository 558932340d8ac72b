"""Does topology add anything? Out-of-sample walk-forward comparison of feature sets.

For each feature set (e.g. baselines only, baselines plus topological summaries) a logistic
regression (scikit-learn, features standardised on the training rows) predicts "a drawdown
event starts within the next ``H`` trading days" at each window end.

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

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import brier_score_loss, roc_auc_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from riskshape.errors import ConfigError
from riskshape.research.events import drawdown_events
from riskshape.research.labels import event_labels
from riskshape.types import FloatArray, IntArray

__all__ = ["WalkForward", "walk_forward"]


@dataclass(frozen=True)
class WalkForward:
    """Out-of-sample predictions and scores of each feature set.

    Attributes
    ----------
    models : tuple of str
        Names of the feature sets, in the order given.
    folds : pandas.DataFrame
        One row per fold: ``fold``, ``trained_until``, ``test_start``, ``test_end``,
        ``n_train``, ``n_train_positive``, ``n_test``, ``n_test_positive``, then
        ``auc_<model>`` and ``brier_<model>`` for each model.
    predictions : pandas.DataFrame
        Indexed by window end (test rows only): ``fold``, ``label`` (final, NaN = unknown or
        inside an event) and ``p_<model>``, the predicted probability (NaN where the model could
        not be trained: one class only in its training rows, or features missing).
    """

    models: tuple[str, ...]
    folds: pd.DataFrame
    predictions: pd.DataFrame

    def table(self) -> pd.DataFrame:
        """Per model: pooled out-of-sample AUC and Brier score, and the mean fold AUC."""
        rows = {}
        for name in self.models:
            scored = self.predictions[["label", f"p_{name}"]].dropna()
            y, p = scored["label"].to_numpy(), scored[f"p_{name}"].to_numpy()
            rows[name] = {
                "pooled_auc": _auc(y, p),
                "pooled_brier": float(brier_score_loss(y, p)) if len(y) else float("nan"),
                "mean_fold_auc": float(self.folds[f"auc_{name}"].mean()),
                "n_scored": int(len(y)),
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
        Inverse L2 strength ``C`` of the logistic regression.
    exclude_in_event, post_event_days
        See :func:`riskshape.research.study.event_labels`.

    Returns
    -------
    WalkForward

    Raises
    ------
    ConfigError
        If a column is missing, no model is given, or there are too few windows for the folds.

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
    >>> wf = walk_forward(features, wealth, models, horizon=3, n_folds=2, min_train=40)
    >>> wf.folds[["trained_until", "n_train_positive", "n_test", "n_test_positive"]]
      trained_until  n_train_positive  n_test  n_test_positive
    0    2031-03-03                 3      16                3
    1    2031-03-31                 6      17                0
    >>> scores = wf.table().loc["noise+stress"]
    >>> float(scores["pooled_auc"]), int(scores["n_scored"])
    (1.0, 33)
    """
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
            "n_test": int(out["label"].notna().sum()),
            "n_test_positive": int((out["label"] == 1).sum()),
        }
        for name, cols in models.items():
            p = _fit_predict(past[list(cols)], train_labels, test[list(cols)], regularization)
            out[f"p_{name}"] = p
            scored = out[["label", f"p_{name}"]].dropna()
            row[f"auc_{name}"] = _auc(scored["label"].to_numpy(), scored[f"p_{name}"].to_numpy())
            row[f"brier_{name}"] = (
                float(brier_score_loss(scored["label"], scored[f"p_{name}"])) if len(scored) else float("nan")
            )
        fold_rows.append(row)
        predictions.append(out)
    return WalkForward(
        models=tuple(models),
        folds=pd.DataFrame(fold_rows),
        predictions=pd.concat(predictions),
    )


def _fit_predict(train_x: pd.DataFrame, train_y: pd.Series, test_x: pd.DataFrame, regularization: float) -> FloatArray:
    """Fitted probabilities on ``test_x``; NaN where a row has a missing feature or training has one class."""
    usable = train_y.notna() & np.isfinite(train_x.to_numpy(dtype=float)).all(axis=1)
    x, y = train_x[usable].to_numpy(dtype=float), train_y[usable].to_numpy()
    out = np.full(len(test_x), np.nan)
    if len(np.unique(y)) < 2:
        return out
    model = make_pipeline(StandardScaler(), LogisticRegression(C=regularization, max_iter=1000))
    model.fit(x, y)
    test_values = test_x.to_numpy(dtype=float)
    ok = np.isfinite(test_values).all(axis=1)
    if ok.any():
        out[ok] = model.predict_proba(test_values[ok])[:, 1]
    return out
