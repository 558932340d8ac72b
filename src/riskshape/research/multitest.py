"""Many columns tested at once: which results survive a correction for multiple comparisons.

An evidence table tests dozens of columns (summaries x estimators x datasets); at the 5 % level
one in twenty columns with no information passes by chance. :func:`mark_multiple_tests` states how
many tests form the family and marks what survives:

* **Holm** (Holm 1979, Scand. J. Statist. 6:65): step-down, controls the family-wise error rate
  (the chance of any false discovery) under any dependence between the tests;
* **Benjamini-Hochberg** (Benjamini and Hochberg 1995, J. R. Statist. Soc. B 57:289): step-up,
  controls the false discovery rate (the expected share of false discoveries among the
  discoveries) for independent or positively dependent tests.

Both come from ``statsmodels.stats.multitest.multipletests`` (``"holm"``, ``"fdr_bh"``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from statsmodels.stats.multitest import multipletests

from riskshape.errors import ConfigError

__all__ = ["mark_multiple_tests"]


def mark_multiple_tests(p_values: pd.Series, *, alpha: float = 0.05) -> pd.DataFrame:
    """Holm and Benjamini-Hochberg adjusted p-values and marks for a family of tests.

    Parameters
    ----------
    p_values : pandas.Series
        One p-value per test, any index; NaN (a test that could not be run) is left out of the
        family and marked as not surviving.
    alpha : float
        Family-wise error rate (Holm) and false discovery rate (Benjamini-Hochberg).

    Returns
    -------
    pandas.DataFrame
        Indexed like ``p_values``: ``p``, ``p_holm``, ``p_bh``, ``survives_holm``,
        ``survives_bh``, ``n_tests`` (the size of the family, the same on every row).

    Raises
    ------
    ConfigError
        If ``alpha`` is not in (0, 1) or a p-value lies outside [0, 1].

    Examples
    --------
    Four tests: Holm compares the smallest p-value with 0.05 / 4, Benjamini-Hochberg the k-th
    smallest with 0.05 k / 4:

    >>> import pandas as pd
    >>> marks = mark_multiple_tests(pd.Series({"a": 0.01, "b": 0.02, "c": 0.03, "d": 0.5}))
    >>> marks[["survives_holm", "survives_bh"]].to_dict("list")
    {'survives_holm': [True, False, False, False], 'survives_bh': [True, True, True, False]}
    >>> int(marks["n_tests"].iloc[0])
    4
    """
    if not 0.0 < alpha < 1.0:
        raise ConfigError(f"mark_multiple_tests: alpha must lie in (0, 1), got {alpha}")
    p = p_values.astype(float)
    tested = p.notna()
    if ((p[tested] < 0) | (p[tested] > 1)).any():
        bad = p[tested][(p[tested] < 0) | (p[tested] > 1)]
        raise ConfigError(f"mark_multiple_tests: p-values must lie in [0, 1]; got {bad.iloc[0]} for {bad.index[0]!r}")
    out = pd.DataFrame(
        {
            "p": p,
            "p_holm": np.nan,
            "p_bh": np.nan,
            "survives_holm": False,
            "survives_bh": False,
            "n_tests": int(tested.sum()),
        },
        index=p.index,
    )
    if tested.any():
        for method, name in (("holm", "holm"), ("fdr_bh", "bh")):
            reject, adjusted, _, _ = multipletests(p[tested].to_numpy(), alpha=alpha, method=method)
            out.loc[tested, f"p_{name}"] = adjusted
            out.loc[tested, f"survives_{name}"] = reject
    return out
