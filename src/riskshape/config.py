"""Configuration: the only module of the library that reads TOML files or the environment.

(The HTTP service reads its own settings from the environment: ``riskshape_service.settings``.)

A :class:`Config` is frozen and validated once, here. ``Config(window=90)`` takes
keyword arguments; :meth:`Config.from_toml` reads a file laid out like
``config/default.toml`` (sections ``[monitor]``, ``[compute]``, ``[alerts]``, ``[daily]``).
:meth:`Config.hash` is a SHA-256 over the canonical JSON of everything that can
change a result (the ``compute`` section cannot, so it is left out; nor can ``daily``, which
decides when a day counts, and each day closed by it is a chained record saying so).
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
import warnings
from collections.abc import Callable, Mapping
from contextvars import ContextVar
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator
from pydantic_core import InitErrorDetails, PydanticCustomError

from riskshape.errors import ConfigError
from riskshape.types import (
    CorrelationEstimator,
    Direction,
    Embedding,
    ExecutorKind,
    MatrixEstimator,
    ReturnsKind,
    RipsBackend,
    RuleKind,
    Severity,
)

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

__all__ = [
    "Config",
    "ComputeConfig",
    "ChecksConfig",
    "DerivedConfig",
    "AlertsConfig",
    "RuleConfig",
    "format_validation_error",
    "default_rules",
    "store_url_from_env",
]


def format_validation_error(
    err: ValidationError, where: str, prefix: str = "", key_name: Callable[[tuple[Any, ...]], str] | None = None
) -> str:
    """Turn a pydantic error into one message per bad field, each naming the key and the value received.

    Parameters
    ----------
    err : pydantic.ValidationError
        The error to format.
    where : str
        What was being read (a file name, or ``"Config(...)"``).
    prefix : str
        Prepended to each key path, e.g. ``"monitor."``.
    key_name : callable, optional
        Turns a pydantic location into the key's name as written (default: dotted path).

    Returns
    -------
    str
        A message of one line per problem.
    """
    lines = []
    for problem in err.errors():
        loc = tuple(problem["loc"])
        key = prefix + (key_name(loc) if key_name else ".".join(str(p) for p in loc))
        got = problem.get("input")
        if problem["type"] == "extra_forbidden":
            lines.append(f"{where}: unknown key '{key}'; remove it or check its spelling (see config/default.toml)")
        else:
            lines.append(f"{where}: '{key}': {problem['msg']} (got {got!r})")
    return "\n".join(lines)


def _key_error(model: str, key: tuple[str | int, ...], value: Any, message: str) -> ValidationError:
    """A validation error of one key (its path inside ``model``), for a check that spans several keys.

    Raised from a validator, it keeps its path, prefixed by the path of the section that holds it, so
    the message names the key as written (``alerts.rules.2.summary``), not only its section.
    """
    problem = PydanticCustomError("riskshape_config", message.replace("{", "{{").replace("}", "}}"))
    return ValidationError.from_exception_data(model, [InitErrorDetails(type=problem, loc=key, input=value)])


# How deep the construction of nested sections is (pydantic runs a custom __init__ for nested models
# too): only the outermost turns pydantic's error into a ConfigError, so nested errors keep their
# full key path; and what is being read, for the message.
_DEPTH: ContextVar[int] = ContextVar("riskshape_config_depth", default=0)
_WHERE: ContextVar[str | None] = ContextVar("riskshape_config_where", default=None)


class _Frozen(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid")

    def __init__(self, **data: Any) -> None:
        token = _DEPTH.set(_DEPTH.get() + 1)
        try:
            super().__init__(**data)
        except ValidationError as err:
            if _DEPTH.get() > 1:
                raise
            where = _WHERE.get()
            if where is None:
                raise ConfigError(format_validation_error(err, f"{type(self).__name__}(...)")) from None
            raise ConfigError(format_validation_error(err, where, key_name=self._file_key)) from None
        finally:
            _DEPTH.reset(token)

    @staticmethod
    def _file_key(loc: tuple[Any, ...]) -> str:
        """How a field is named in a file (Config moves its own fields under [monitor])."""
        return ".".join(str(p) for p in loc)

    @classmethod
    def _build(cls, data: Mapping[str, Any], where: str) -> Any:
        """Construct from a mapping read from ``where`` (a file, the environment); errors name it."""
        token = _WHERE.set(where)
        try:
            return cls(**data)
        finally:
            _WHERE.reset(token)


class ComputeConfig(_Frozen):
    """Where windows are computed; never changes a result."""

    executor: ExecutorKind = "process"
    workers: int = Field(0, ge=0, description="processes for the local pool; 0 means one per core")
    scheduler: str | None = Field(None, description="Dask scheduler address, e.g. tcp://10.0.0.5:8786")
    batch_windows: int = Field(
        64, ge=1, description="most windows sent to a worker at once (smaller batches keep every worker busy)"
    )


class DailyConfig(_Frozen):
    """The daily loop's policy (:mod:`riskshape.daily.days`); never changes a window's value."""

    close_share: float | None = Field(
        None,
        gt=0.0,
        le=1.0,
        description="close a day once this share of its listed assets has a price (off when unset)",
    )


class ChecksConfig(_Frozen):
    """What is checked before any work: data quality and the cost of the run; never changes a result.

    ``quality`` says whether a data-quality finding (a constant asset, a window with every asset left
    out, a one-day move beyond ``max_day_ratio``) is a warning or refuses the run. A one-day move is
    beyond the bound when the price is more than ``max_day_ratio`` times, or less than its inverse
    times, the previous price of that asset (default 2: a doubling or a halving in one day). The
    cost of a run is estimated before any window is computed and refused above ``budget_seconds`` or
    ``budget_memory_mb``.
    """

    quality: Literal["warn", "refuse"] = "warn"
    max_day_ratio: float = Field(2.0, gt=1.0, description="largest one-day price ratio before a likely bad print")
    budget_seconds: float = Field(1800.0, gt=0, description="largest estimated run time accepted (seconds)")
    budget_memory_mb: float = Field(4096.0, gt=0, description="largest estimated peak memory accepted (MB)")


class DerivedConfig(_Frozen):
    """Optional columns derived from the summaries (:mod:`riskshape.compute.derived`); off by default.

    ``net_of_market`` adds, for each topological summary, its residual from a causal trailing
    regression on the mean correlation and the equal-weight volatility (``{summary}_net``) and that
    residual's z-score (``{summary}_net_z``), the fit at a window using the ``net_of_market_window``
    windows before it. ``change_horizons`` adds each summary's change over each horizon, in trading
    days (``{summary}_chg_{h}``, the value at the window minus the value ``h`` days before).
    """

    net_of_market: bool = False
    net_of_market_window: int = Field(
        250, ge=10, le=5000, description="windows before each window that its net-of-market fit uses"
    )
    change_horizons: tuple[int, ...] = Field((), description="trading days of each change column, e.g. [20, 60, 100]")

    @field_validator("change_horizons")
    @classmethod
    def _check_horizons(cls, horizons: tuple[int, ...]) -> tuple[int, ...]:
        if any(h < 1 for h in horizons) or len(set(horizons)) != len(horizons):
            raise ValueError(
                "each horizon must be a whole number of trading days of at least 1, listed once "
                "(e.g. change_horizons = [20, 60, 100])"
            )
        return horizons

    @property
    def active(self) -> bool:
        """Whether any derived column is asked for."""
        return self.net_of_market or bool(self.change_horizons)


class RuleConfig(_Frozen):
    """One alert rule over one summary column.

    ``kind`` decides what ``threshold`` and ``clear`` mean: for ``level`` they are values
    of the summary; for ``quantile`` they are quantiles in (0, 1) of the summary's trailing
    history; for ``zscore`` they are z-scores against the trailing mean and standard deviation.
    """

    name: str = Field(min_length=1, max_length=80, pattern=r"^[A-Za-z0-9_.-]+$")
    summary: str = Field(min_length=1)
    kind: RuleKind
    threshold: float
    clear: float | None = None
    direction: Direction = "above"
    lookback: int = Field(250, ge=2, description="trailing windows used by quantile and zscore")
    min_history: int = Field(60, ge=0, description="windows of history needed before the rule may fire")
    consecutive: int = Field(1, ge=1, description="windows in a row beyond the threshold before it fires")
    cooldown: int = Field(0, ge=0, description="windows after a firing during which it may not fire again")
    severity: Severity = "warning"

    @model_validator(mode="after")
    def _check_levels(self) -> RuleConfig:
        if self.kind == "quantile":
            for key in ("threshold", "clear"):
                value = getattr(self, key)
                if value is not None and not 0.0 < value < 1.0:
                    raise _key_error(
                        "RuleConfig",
                        (key,),
                        value,
                        f"rule '{self.name}': {key} of a quantile rule must lie in (0, 1), got {value}; "
                        "write the quantile itself (0.99 for the 99th percentile), or use kind = 'level'",
                    )
        if self.clear is not None:
            wrong_side = self.clear > self.threshold if self.direction == "above" else self.clear < self.threshold
            if wrong_side:
                raise _key_error(
                    "RuleConfig",
                    ("clear",),
                    self.clear,
                    f"rule '{self.name}': clear ({self.clear}) must be on the calm side of threshold "
                    f"({self.threshold}) for a rule that fires {self.direction} it",
                )
        if self.min_history > self.lookback:
            raise _key_error(
                "RuleConfig",
                ("min_history",),
                self.min_history,
                f"rule '{self.name}': min_history ({self.min_history}) exceeds lookback ({self.lookback}), "
                "the windows in which history is counted, so it could never fire; lower min_history or raise lookback",
            )
        return self


@lru_cache(maxsize=1)
def default_rules() -> tuple[RuleConfig, ...]:
    """The alert rules shipped in ``config/default.toml`` (packaged as ``riskshape/default.toml``)."""
    text = resources.files("riskshape").joinpath("default.toml").read_text(encoding="utf-8")
    rules = tomllib.loads(text).get("alerts", {}).get("rules", [])
    return tuple(RuleConfig(**rule) for rule in rules)


class AlertsConfig(_Frozen):
    """The alert rules; by default those of ``config/default.toml``. ``rules = []`` turns them off."""

    rules: tuple[RuleConfig, ...] = Field(default_factory=default_rules)

    @model_validator(mode="after")
    def _check_names(self) -> AlertsConfig:
        seen: set[str] = set()
        for i, rule in enumerate(self.rules):
            if rule.name in seen:
                raise _key_error(
                    "AlertsConfig",
                    ("rules", i, "name"),
                    rule.name,
                    f"alerts rule name '{rule.name}' is used twice; give each rule its own name",
                )
            seen.add(rule.name)
        return self


_SECTIONS = ("compute", "alerts", "daily", "checks", "derived")
"""The configuration's sections besides ``[monitor]``, whose keys are the Config's own fields."""


class Config(_Frozen):
    """Everything that decides what riskshape computes.

    Parameters
    ----------
    window : int
        Returns per window (trading days). A window is labelled by its last date.
    step : int
        Windows advance by this many trading days.
    min_coverage : float
        An asset enters a window only if at least this fraction of the window's returns are
        present; its missing returns are then set to its mean over the window.
    returns : {"log", "simple"}
        How returns are made from prices.
    correlation : {"pearson", "spearman"}
        Correlation estimator.
    estimator : {"sample", "ledoit_wolf", "clipped", "market_removed", "ewma"}
        How the window's correlation matrix is estimated from its returns (their ranks with
        ``spearman``): the sample estimate, Ledoit-Wolf shrinkage, eigenvalue clipping at the
        Marchenko-Pastur edge, the market mode removed, or exponential weights (decay 0.94); see
        :mod:`riskshape.compute.estimators`.
    maxdim : int
        Highest homology dimension computed (0, 1 or 2).
    order_p : float
        Order of the Wasserstein distance to the previous window (ground metric L-infinity).
    rips_backend : {"auto", "ripser", "giotto"}
        Vietoris-Rips backend; ``auto`` uses giotto-ph where it is installed, else ripser. The old
        name of this key, ``engine``, is still read, with a :class:`DeprecationWarning`.
    embedding : {"correlation", "point_cloud"}
        ``correlation``: assets are points, d = sqrt(2 (1 - rho)). ``point_cloud``: the days of the
        window are points in R^n (one coordinate per asset).
    standardize_cloud : bool
        For ``point_cloud``: divide each asset's returns by its window standard deviation.
    compute, alerts, daily, checks, derived
        See :class:`ComputeConfig`, :class:`AlertsConfig`, :class:`DailyConfig`, :class:`ChecksConfig`
        and :class:`DerivedConfig`.

    Examples
    --------
    >>> Config(window=90, maxdim=1).window
    90
    """

    window: int = Field(60, ge=5, le=5000)
    step: int = Field(1, ge=1)
    min_coverage: float = Field(0.9, gt=0.0, le=1.0)
    returns: ReturnsKind = "log"
    correlation: CorrelationEstimator = "pearson"
    estimator: MatrixEstimator = "sample"
    maxdim: int = Field(1, ge=0, le=2)
    order_p: float = Field(1.0, ge=1.0)
    rips_backend: RipsBackend = "auto"
    embedding: Embedding = "correlation"
    standardize_cloud: bool = True
    compute: ComputeConfig = ComputeConfig()
    alerts: AlertsConfig = AlertsConfig()
    daily: DailyConfig = DailyConfig()
    checks: ChecksConfig = ChecksConfig()
    derived: DerivedConfig = DerivedConfig()

    @model_validator(mode="before")
    @classmethod
    def _renamed_keys(cls, data: Any) -> Any:
        """Read ``engine``, the old name of ``rips_backend`` (files and archived runs still hold it)."""
        if not isinstance(data, Mapping) or "engine" not in data:
            return data
        renamed = dict(data)
        value = renamed.pop("engine")
        if "rips_backend" in renamed and renamed["rips_backend"] != value:
            raise _key_error(
                "Config",
                ("engine",),
                value,
                f"'engine' is the old name of 'rips_backend', which is also given ({renamed['rips_backend']!r}); "
                "keep only rips_backend",
            )
        warnings.warn(
            f"configuration key 'engine' is renamed 'rips_backend'; write rips_backend = {value!r} instead",
            DeprecationWarning,
            stacklevel=2,
        )
        renamed["rips_backend"] = value
        return renamed

    @model_validator(mode="after")
    def _check_rule_summaries(self) -> Config:
        """Each configured rule watches a summary this configuration computes.

        The shipped default rules, when no rules are given, are left to rule evaluation: they watch
        H1 summaries, and ``maxdim = 0`` without alert rules (research, a quick H0 look) is a sound
        configuration.
        """
        if "alerts" not in self.model_fields_set or "rules" not in self.alerts.model_fields_set:
            return self
        # lazy: the computation imports this module
        from riskshape.compute.derived import derived_column_names, derived_source
        from riskshape.compute.monitor import feature_columns

        computed = feature_columns(self.maxdim)
        computed += derived_column_names(computed, self.derived)
        for i, rule in enumerate(self.alerts.rules):
            if rule.summary in computed:
                continue
            key = ("alerts", "rules", i, "summary")
            source = derived_source(rule.summary)
            if source is not None and source[0] in computed:
                message = (
                    f"rule '{rule.name}' watches {rule.summary}, a derived column that this configuration does not "
                    f"compute; {source[1]} (in [derived]), or watch another summary"
                )
            elif rule.summary in feature_columns(2):
                dim = int(rule.summary[1])
                message = (
                    f"rule '{rule.name}' watches {rule.summary}, an H{dim} summary, but maxdim = {self.maxdim} "
                    f"computes H0..H{self.maxdim} only; set maxdim = {dim} (in [monitor]), or watch another summary, "
                    "or remove the rule"
                )
            else:
                message = (
                    f"rule '{rule.name}' watches {rule.summary!r}, which is not a summary; "
                    f"use one of: {', '.join(computed)}"
                )
            raise _key_error("Config", key, rule.summary, message)
        return self

    @model_validator(mode="after")
    def _check_change_horizons(self) -> Config:
        """Each change horizon spans whole windows: a multiple of ``step``."""
        uneven = [h for h in self.derived.change_horizons if h % self.step]
        if uneven:
            raise _key_error(
                "Config",
                ("derived", "change_horizons"),
                list(self.derived.change_horizons),
                f"change horizons {uneven} are not multiples of step = {self.step}: a change compares two "
                "windows, which lie step trading days apart; use multiples of step",
            )
        return self

    @classmethod
    def from_toml(cls, path: str | os.PathLike[str]) -> Config:
        """Read a configuration file laid out like ``config/default.toml``.

        Parameters
        ----------
        path : path-like
            The TOML file.

        Returns
        -------
        Config

        Raises
        ------
        ConfigError
            If the file is missing, is not TOML, or holds an unknown key or a bad value.
        """
        file = Path(path)
        try:
            data = tomllib.loads(file.read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise ConfigError(f"{file}: no such configuration file") from None
        except (OSError, UnicodeDecodeError) as err:
            raise ConfigError(f"{file}: cannot read it ({err})") from None
        except tomllib.TOMLDecodeError as err:
            raise ConfigError(f"{file}: not valid TOML ({err})") from None
        return cls.from_mapping(data, where=str(file))

    @classmethod
    def from_mapping(cls, data: Mapping[str, Any], where: str = "configuration") -> Config:
        """Build a Config from the nested mapping a TOML file holds (``monitor``, ``compute``, ``alerts``,
        ``daily``, ``checks``, ``derived``).
        """
        unknown = set(data) - {"monitor", *_SECTIONS}
        if unknown:
            raise ConfigError(
                f"{where}: unknown section(s) {sorted(unknown)}; "
                "allowed are [monitor], [compute], [alerts], [daily], [checks], [derived]"
            )
        flat: dict[str, Any] = dict(data.get("monitor", {}))
        for section in _SECTIONS:
            if section in data:
                flat[section] = data[section]
        built: Config = cls._build(flat, where)
        return built

    @staticmethod
    def _file_key(loc: tuple[Any, ...]) -> str:
        dotted = ".".join(str(p) for p in loc)
        return dotted if not loc or loc[0] in _SECTIONS else f"monitor.{dotted}"

    def to_mapping(self) -> dict[str, Any]:
        """The nested mapping :meth:`from_mapping` reads (round-trips)."""
        dumped = self.model_dump(mode="json")
        sections = {section: dumped.pop(section) for section in _SECTIONS}
        return {"monitor": dumped, **sections}

    def replace(self, **changes: Any) -> Config:
        """A copy with some fields changed, validated like a new Config."""
        data = self.model_dump(exclude_unset=True)  # what was left to its default stays so (see the rule check)
        data.update(changes)
        return type(self)(**data)

    def hash(self) -> str:
        """SHA-256 (hex) of the canonical JSON of every setting that can change a result."""
        payload = self.model_dump(mode="json", exclude={"compute", "daily", "checks"})
        # Hashed under its old name: archived runs are looked up by this hash, and they were stored
        # when the key was called `engine`; renaming it must not change the hash of any configuration.
        payload["engine"] = payload.pop("rips_backend")
        # Hashed only when it is not the sample estimate: every configuration written before the key
        # existed computed the sample estimate, and its archived runs are looked up by this hash.
        if payload["estimator"] == "sample":
            del payload["estimator"]
        # Hashed only when it adds columns: with [derived] off a run computes what it computed before
        # the section existed, and its archived runs are looked up by this hash.
        if not self.derived.active:
            del payload["derived"]
        text = json.dumps(payload, sort_keys=True, separators=(",", ":"), allow_nan=False)
        return hashlib.sha256(text.encode("utf-8")).hexdigest()


def store_url_from_env(environ: Mapping[str, str] | None = None) -> str | None:
    """The archive URL in ``RISKSHAPE_STORE_URL``, if set (the CLI's default for ``--store``).

    Parameters
    ----------
    environ : mapping of str to str, optional
        The environment to read; ``os.environ`` by default.

    Returns
    -------
    str or None
        The URL, or None when the variable is unset or empty.
    """
    env = os.environ if environ is None else environ
    return env.get("RISKSHAPE_STORE_URL") or None
