"""Surrogate returns and per-window significance of the summaries against them.

Each surrogate keeps some properties of a window's returns block (days x assets) and destroys
others; a summary that stands out from its surrogates carries what the surrogate destroyed:

* ``shuffle`` - each asset's days permuted independently: keeps each asset's distribution,
  destroys cross-asset dependence and any time order;
* ``gaussian`` - a multivariate normal with the window's mean and covariance: keeps the
  correlation matrix (up to sampling), destroys fat tails and any higher structure;
* ``phase`` - multivariate phase randomisation (Prichard and Theiler 1994, Phys. Rev. Lett.
  73:951): the same random phase is added at each frequency to every asset's Fourier transform,
  keeping every auto- and cross-periodogram (so the linear auto- and cross-correlations, in the
  circular sense) and making the data Gaussian-like. By Parseval it keeps the sample covariance
  exactly, so correlation-distance summaries do not change at all under it (their z-scores are
  NaN): it is a null for the point-cloud embedding, where the days themselves are the points;
* ``iaaft`` - iterative amplitude-adjusted Fourier transform, multivariate (Schreiber and
  Schmitz 2000, Physica D 142:346): alternately imposes the original amplitudes with the
  original cross-phases (each asset's phase is its original phase plus a common angle
  ``alpha(f)``, chosen closest to the current iterate: ``tan alpha = sum_j sin(psi_j - phi_j) /
  sum_j cos(psi_j - phi_j)``, from memory of the paper) and the original values of each asset
  (rank ordering); keeps each asset's distribution exactly and its spectra approximately;
* ``stationary_bootstrap`` / ``moving_block_bootstrap`` - days resampled jointly in blocks
  (Politis and Romano 1994; Kuensch 1989) with ``arch.bootstrap``: keeps the cross-section of each
  day and short-range time dependence, reorders time.

:func:`surrogate_zscores` gives, for one window, each summary's z-score and two-sided empirical
p-value against ``n`` surrogates; :func:`rolling_surrogate_zscores` does it for chosen windows
of a monitoring run, with the summaries computed by the engine's own building blocks.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd
from arch.bootstrap import MovingBlockBootstrap, StationaryBootstrap
from scipy.stats import rankdata

from riskshape.compute.batch import WindowSettings, compute_window
from riskshape.compute.executors import make_executor
from riskshape.compute.monitor import MonitorResult, settings_of
from riskshape.compute.summaries import SUMMARY_NAMES, summarize_diagram
from riskshape.errors import ConfigError, DataError
from riskshape.types import FloatArray, ReturnsBlock

__all__ = [
    "METHODS",
    "surrogate",
    "SurrogateTest",
    "surrogate_zscores",
    "WindowSummaries",
    "rolling_surrogate_zscores",
]

Method = Literal["shuffle", "gaussian", "phase", "iaaft", "stationary_bootstrap", "moving_block_bootstrap"]
METHODS: tuple[str, ...] = ("shuffle", "gaussian", "phase", "iaaft", "stationary_bootstrap", "moving_block_bootstrap")


def _complete(block: ReturnsBlock, method: str) -> ReturnsBlock:
    data = np.asarray(block, dtype=float)
    if data.ndim != 2 or data.shape[0] < 4:
        raise DataError(
            f"surrogate '{method}': need a (days, assets) block with at least 4 days, got shape {data.shape}"
        )
    if not np.isfinite(data).all():
        raise DataError(
            f"surrogate '{method}': the block holds missing or infinite returns; use the complete block "
            "riskshape.compute.windows.select_assets gives"
        )
    return data


def _shuffle(x: ReturnsBlock, rng: np.random.Generator) -> ReturnsBlock:
    return rng.permuted(x, axis=0)


def _gaussian(x: ReturnsBlock, rng: np.random.Generator) -> ReturnsBlock:
    cov = np.atleast_2d(np.cov(x, rowvar=False))
    return rng.multivariate_normal(x.mean(axis=0), cov, size=x.shape[0], method="eigh")


def _random_phases(n_days: int, rng: np.random.Generator) -> FloatArray:
    """One random phase per rfft frequency; 0 at frequency 0 and at Nyquist (they must stay real)."""
    n_freq = n_days // 2 + 1
    phases = rng.uniform(0.0, 2.0 * np.pi, n_freq)
    phases[0] = 0.0
    if n_days % 2 == 0:
        phases[-1] = 0.0
    return phases


def _phase(x: ReturnsBlock, rng: np.random.Generator) -> ReturnsBlock:
    spectrum = np.fft.rfft(x, axis=0)
    rotated = spectrum * np.exp(1j * _random_phases(x.shape[0], rng))[:, None]
    return np.fft.irfft(rotated, n=x.shape[0], axis=0)


def _rank_order(target_sorted: ReturnsBlock, y: ReturnsBlock) -> ReturnsBlock:
    """Each column of ``y`` replaced by ``target_sorted``'s values in ``y``'s rank order."""
    ranks = (rankdata(y, axis=0, method="ordinal") - 1).astype(np.int64)
    return np.take_along_axis(target_sorted, ranks, axis=0)


def _iaaft(x: ReturnsBlock, rng: np.random.Generator, max_iter: int = 200) -> ReturnsBlock:
    n_days = x.shape[0]
    target_sorted = np.sort(x, axis=0)
    spectrum = np.fft.rfft(x, axis=0)
    amplitude, phase0 = np.abs(spectrum), np.angle(spectrum)
    y = _shuffle(x, rng)
    ranks = None
    for _ in range(max_iter):
        psi = np.angle(np.fft.rfft(y, axis=0))
        alpha = np.arctan2(np.sin(psi - phase0).sum(axis=1), np.cos(psi - phase0).sum(axis=1))
        y = np.fft.irfft(amplitude * np.exp(1j * (phase0 + alpha[:, None])), n=n_days, axis=0)
        new_ranks = rankdata(y, axis=0, method="ordinal")
        y = _rank_order(target_sorted, y)
        if ranks is not None and np.array_equal(ranks, new_ranks):
            break
        ranks = new_ranks
    return y


def _bootstrap(x: ReturnsBlock, rng: np.random.Generator, kind: str, block_size: int | None) -> ReturnsBlock:
    size = block_size or max(1, int(round(x.shape[0] ** (1.0 / 3.0))))  # T^(1/3): common practice
    scheme = StationaryBootstrap if kind == "stationary_bootstrap" else MovingBlockBootstrap
    resampler = scheme(size, x, seed=rng)
    (data,), _ = next(resampler.bootstrap(1))
    return np.asarray(data, dtype=float)


def surrogate(
    block: ReturnsBlock, method: Method, rng: np.random.Generator, *, block_size: int | None = None
) -> ReturnsBlock:
    """One surrogate of a complete returns block.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets) returns, no NaN (``shuffle`` alone accepts NaN and moves it with the rest).
    method : str
        One of :data:`METHODS` (see the module notes).
    rng : numpy.random.Generator
        Source of randomness.
    block_size : int, optional
        Mean (stationary) or fixed (moving) block length of the bootstraps; default
        ``round(days ** (1/3))``.

    Returns
    -------
    numpy.ndarray
        Same shape as ``block``.

    Raises
    ------
    ConfigError
        For an unknown method.
    DataError
        For a block with missing values or fewer than 4 days.

    Examples
    --------
    A shuffle keeps each asset's values; phase randomisation keeps the sample covariance
    (Parseval; Prichard and Theiler 1994):

    >>> import numpy as np
    >>> rng = np.random.default_rng(2)
    >>> block = rng.normal(size=(40, 1)) + 0.5 * rng.normal(size=(40, 4))
    >>> np.array_equal(np.sort(surrogate(block, "shuffle", rng), axis=0), np.sort(block, axis=0))
    True
    >>> np.allclose(np.cov(surrogate(block, "phase", rng), rowvar=False), np.cov(block, rowvar=False))
    True
    """
    if method == "shuffle":  # missing returns are moved with the others
        return _shuffle(np.asarray(block, dtype=float), rng)
    x = _complete(block, method)
    if method == "gaussian":
        return _gaussian(x, rng)
    if method == "phase":
        return _phase(x, rng)
    if method == "iaaft":
        return _iaaft(x, rng)
    if method in ("stationary_bootstrap", "moving_block_bootstrap"):
        return _bootstrap(x, rng, method, block_size)
    raise ConfigError(f"unknown surrogate method {method!r}; choose one of {', '.join(METHODS)}")


@dataclass(frozen=True)
class SurrogateTest:
    """A window's summaries against their surrogate null.

    Attributes
    ----------
    method : str
    observed : pandas.Series
        Each summary on the window itself.
    null : pandas.DataFrame
        Each summary (column) on each surrogate (row).
    """

    method: str
    observed: pd.Series
    null: pd.DataFrame

    @property
    def zscores(self) -> pd.Series:
        """(observed - null mean) / null standard deviation (ddof = 1).

        NaN when the null is constant up to rounding (std <= 1e-9 times the null mean's size).
        """
        mean, std = self.null.mean(), self.null.std(ddof=1)
        spread = std.where(std > 1e-9 * np.maximum(mean.abs(), 1e-12))
        return ((self.observed - mean) / spread).rename("z")

    @property
    def pvalues(self) -> pd.Series:
        """Two-sided empirical p-values ``(1 + #{|null - m| >= |obs - m|}) / (n + 1)``, m the null mean.

        The +1 keeps a p-value from being 0 with finitely many surrogates (common practice,
        e.g. Davison and Hinkley 1997, from memory).
        """
        centre = self.null.mean()
        extreme = (self.null - centre).abs().ge((self.observed - centre).abs(), axis=1).sum()
        return ((1.0 + extreme) / (len(self.null) + 1.0)).rename("p")

    def table(self) -> pd.DataFrame:
        """One row per summary: ``observed``, ``null_mean``, ``null_std``, ``z``, ``p``."""
        return pd.DataFrame(
            {
                "observed": self.observed,
                "null_mean": self.null.mean(),
                "null_std": self.null.std(ddof=1),
                "z": self.zscores,
                "p": self.pvalues,
            }
        )


def surrogate_zscores(
    block: ReturnsBlock,
    summary_fn: Callable[[ReturnsBlock], Mapping[str, float]],
    n: int,
    method: Method,
    rng: np.random.Generator,
    *,
    block_size: int | None = None,
) -> SurrogateTest:
    """Summaries of one window against ``n`` surrogates of it.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets) complete returns of the window.
    summary_fn : callable
        Block -> mapping (or Series) of summary name to value, e.g. :class:`WindowSummaries`.
    n : int
        Number of surrogates (>= 2).
    method : str
        One of :data:`METHODS`.
    rng : numpy.random.Generator
    block_size : int, optional
        For the bootstraps.

    Returns
    -------
    SurrogateTest

    Examples
    --------
    Four assets driven by one common factor: shuffling each asset's days destroys their
    correlation, so the observed mean correlation beats all 20 surrogates (p = 1 / 21):

    >>> import numpy as np
    >>> rng = np.random.default_rng(2)
    >>> block = rng.normal(size=(40, 1)) + 0.5 * rng.normal(size=(40, 4))
    >>> def mean_correlation(x):
    ...     c = np.corrcoef(x, rowvar=False)
    ...     return {"mean_correlation": c[np.triu_indices_from(c, 1)].mean()}
    >>> test = surrogate_zscores(block, mean_correlation, 20, "shuffle", rng)
    >>> bool(test.zscores["mean_correlation"] > 5), bool(test.pvalues["mean_correlation"] == 1 / 21)
    (True, True)
    """
    if n < 2:
        raise ConfigError(f"surrogate_zscores: n must be at least 2 surrogates, got {n}")
    x = _complete(block, method)
    observed = pd.Series(dict(summary_fn(x)), dtype=float)
    null = pd.DataFrame(
        [dict(summary_fn(surrogate(x, method, rng, block_size=block_size))) for _ in range(n)], dtype=float
    )
    return SurrogateTest(method=method, observed=observed, null=null[observed.index])


@dataclass(frozen=True)
class WindowSummaries:
    """The monitor's per-window summaries of a complete block, by the engine's own functions.

    Calling it on a block gives ``mean_correlation`` and ``h{k}_<summary>`` for k = 0..maxdim
    (the diagram summaries of :mod:`riskshape.compute.summaries`), through
    :func:`riskshape.compute.batch.compute_window` (so the embedding of the configuration is used).
    Picklable, so it can go to worker processes.
    """

    settings: WindowSettings

    def __call__(self, block: ReturnsBlock) -> dict[str, float]:
        """The summaries of one (days, assets) block, by name."""
        result = compute_window(block, self.settings)
        values = {"mean_correlation": float(result.mean_correlation)}
        for k, dgm in enumerate(result.diagrams):
            for name, value in zip(SUMMARY_NAMES, summarize_diagram(dgm).as_tuple()):
                values[f"h{k}_{name}"] = float(value)
        return values


def _one_window(
    window_end: pd.Timestamp,
    block: ReturnsBlock,
    settings: WindowSettings,
    n: int,
    method: Method,
    rng: np.random.Generator,
    block_size: int | None,
) -> pd.DataFrame:
    table = surrogate_zscores(block, WindowSummaries(settings), n, method, rng, block_size=block_size).table()
    table.index.name = "summary"
    return table.reset_index().assign(window_end=window_end)


def rolling_surrogate_zscores(
    result: MonitorResult,
    n: int,
    method: Method,
    rng: np.random.Generator,
    *,
    window_ends: Sequence[object] | pd.DatetimeIndex | None = None,
    block_size: int | None = None,
) -> pd.DataFrame:
    """Per-window z-scores and p-values of the summaries of a monitoring run against surrogates.

    Parameters
    ----------
    result : MonitorResult
    n : int
        Surrogates per window.
    method : str
        One of :data:`METHODS`.
    rng : numpy.random.Generator
        Each window gets its own child generator (``rng.spawn``), so results do not depend on
        the executor.
    window_ends : sequence of dates, optional
        Windows to test (default: all of them; this costs ``n`` times the run).
    block_size : int, optional
        For the bootstraps.

    Returns
    -------
    pandas.DataFrame
        Long table: ``window_end``, ``summary``, ``observed``, ``null_mean``, ``null_std``, ``z``, ``p``.

    Examples
    --------
    >>> from riskshape import Config, monitor
    >>> from riskshape.demo import generate_scenario
    >>> scenario = generate_scenario(seed=1, n_days=90, assets_per_sector=3)
    >>> run = monitor(scenario.prices, Config(window=20, compute={"executor": "serial"}))
    >>> table = rolling_surrogate_zscores(run, 5, "shuffle", np.random.default_rng(0), window_ends=run.window_ends[-2:])
    >>> table.groupby("window_end").size().tolist(), table["summary"].iloc[0]
    ([11, 11], 'mean_correlation')
    """
    ends = result.window_ends if window_ends is None else pd.DatetimeIndex(pd.to_datetime(list(window_ends)))
    settings = settings_of(result.config)
    jobs = []
    for end, child in zip(ends, rng.spawn(len(ends))):
        block = result.window(end).block  # validates the date; the engine's block of admitted assets
        jobs.append((pd.Timestamp(end), block, settings, n, method, child, block_size))
    executor = make_executor(result.config.compute, len(jobs))
    try:
        parts = list(executor.map(_one_window, jobs))
    finally:
        executor.close()
    columns = ["window_end", "summary", "observed", "null_mean", "null_std", "z", "p"]
    if not parts:
        return pd.DataFrame(columns=columns)
    return pd.concat(parts, ignore_index=True)[columns]
