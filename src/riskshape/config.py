"""Configuration: the only module that reads TOML files or the environment.

A :class:`Config` is frozen and validated once, here. ``Config(window=90)`` takes
keyword arguments; :meth:`Config.from_toml` reads a file laid out like
``config/default.toml`` (sections ``[monitor]``, ``[compute]``, ``[alerts]``).
:meth:`Config.hash` is a SHA-256 over the canonical JSON of everything that can
change a result (the ``compute`` section cannot, so it is left out).
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
from collections.abc import Callable, Mapping
from contextvars import ContextVar
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from riskshape.errors import ConfigError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

__all__ = [
    "Config",
    "ComputeConfig",
    "AlertsConfig",
    "RuleConfig",
    "ServiceSettings",
    "format_validation_error",
    "default_rules",
    "store_url_from_env",
]

Severity = Literal["info", "warning", "critical"]


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

    executor: Literal["serial", "process", "dask"] = "process"
    workers: int = Field(0, ge=0, description="processes for the local pool; 0 means one per core")
    scheduler: str | None = Field(None, description="Dask scheduler address, e.g. tcp://10.0.0.5:8786")
    batch_windows: int = Field(
        64, ge=1, description="most windows sent to a worker at once (smaller batches keep every worker busy)"
    )


class RuleConfig(_Frozen):
    """One alert rule over one summary column.

    ``kind`` decides what ``threshold`` and ``clear`` mean: for ``level`` they are values
    of the summary; for ``quantile`` they are quantiles in (0, 1) of the summary's trailing
    history; for ``zscore`` they are z-scores against the trailing mean and standard deviation.
    """

    name: str = Field(min_length=1, max_length=80, pattern=r"^[A-Za-z0-9_.-]+$")
    summary: str = Field(min_length=1)
    kind: Literal["level", "quantile", "zscore"]
    threshold: float
    clear: float | None = None
    direction: Literal["above", "below"] = "above"
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
                    raise ValueError(f"{key} of a quantile rule must lie in (0, 1), got {value}")
        if self.clear is not None:
            wrong_side = self.clear > self.threshold if self.direction == "above" else self.clear < self.threshold
            if wrong_side:
                raise ValueError(
                    f"clear ({self.clear}) must be on the calm side of threshold ({self.threshold}) "
                    f"for a rule that fires {self.direction} it"
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
    maxdim : int
        Highest homology dimension computed (0, 1 or 2).
    order_p : float
        Order of the Wasserstein distance to the previous window (ground metric L-infinity).
    engine : {"auto", "ripser", "giotto"}
        Vietoris-Rips engine; ``auto`` uses giotto-ph where it is installed, else ripser.
    embedding : {"correlation", "point_cloud"}
        ``correlation``: assets are points, d = sqrt(2 (1 - rho)). ``point_cloud``: the days of the
        window are points in R^n (one coordinate per asset).
    standardize_cloud : bool
        For ``point_cloud``: divide each asset's returns by its window standard deviation.
    compute, alerts
        See :class:`ComputeConfig` and :class:`AlertsConfig`.

    Examples
    --------
    >>> Config(window=90, maxdim=1).window
    90
    """

    window: int = Field(60, ge=5, le=5000)
    step: int = Field(1, ge=1)
    min_coverage: float = Field(0.9, gt=0.0, le=1.0)
    returns: Literal["log", "simple"] = "log"
    correlation: Literal["pearson", "spearman"] = "pearson"
    maxdim: int = Field(1, ge=0, le=2)
    order_p: float = Field(1.0, ge=1.0)
    engine: Literal["auto", "ripser", "giotto"] = "auto"
    embedding: Literal["correlation", "point_cloud"] = "correlation"
    standardize_cloud: bool = True
    compute: ComputeConfig = ComputeConfig()
    alerts: AlertsConfig = AlertsConfig()

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
        """Build a Config from the nested mapping a TOML file holds (``monitor``, ``compute``, ``alerts``)."""
        unknown = set(data) - {"monitor", "compute", "alerts"}
        if unknown:
            raise ConfigError(
                f"{where}: unknown section(s) {sorted(unknown)}; allowed are [monitor], [compute], [alerts]"
            )
        flat: dict[str, Any] = dict(data.get("monitor", {}))
        for section in ("compute", "alerts"):
            if section in data:
                flat[section] = data[section]
        built: Config = cls._build(flat, where)
        return built

    @staticmethod
    def _file_key(loc: tuple[Any, ...]) -> str:
        dotted = ".".join(str(p) for p in loc)
        return dotted if not loc or loc[0] in ("compute", "alerts") else f"monitor.{dotted}"

    def to_mapping(self) -> dict[str, Any]:
        """The nested mapping :meth:`from_mapping` reads (round-trips)."""
        dumped = self.model_dump(mode="json")
        compute = dumped.pop("compute")
        alerts = dumped.pop("alerts")
        return {"monitor": dumped, "compute": compute, "alerts": alerts}

    def replace(self, **changes: Any) -> Config:
        """A copy with some fields changed, validated like a new Config."""
        data = self.model_dump()
        data.update(changes)
        return type(self)(**data)

    def hash(self) -> str:
        """SHA-256 (hex) of the canonical JSON of every setting that can change a result."""
        payload = self.model_dump(mode="json", exclude={"compute"})
        text = json.dumps(payload, sort_keys=True, separators=(",", ":"), allow_nan=False)
        return hashlib.sha256(text.encode("utf-8")).hexdigest()


def store_url_from_env(environ: Mapping[str, str] | None = None) -> str | None:
    """The archive URL in ``RISKSHAPE_STORE_URL``, if set (the CLI's default for ``--store``)."""
    env = os.environ if environ is None else environ
    return env.get("RISKSHAPE_STORE_URL") or None


class ServiceSettings(_Frozen):
    """Settings of the HTTP service, read from ``RISKSHAPE_*`` environment variables by :meth:`from_env`
    (``RISKSHAPE_STORE_URL``, ``RISKSHAPE_MAX_BODY_BYTES``, ...).

    Parameters
    ----------
    store_url : str
        Archive URL (``sqlite:///path`` or ``postgresql+psycopg://...``).
    max_body_bytes : int
        Largest request body accepted, counted as it streams (413 beyond it).
    max_page_size : int
        Largest page a paged endpoint returns (422 beyond it).
    rate_limit_per_minute : int
        Sustained requests a minute per API key (429 with Retry-After beyond it).
    rate_limit_burst : int
        Requests a key may make at once after being idle (the token bucket's size).
    config_path : str or None
        TOML configuration for portfolios before their first run (defaults without it); a portfolio
        with runs keeps the configuration of its latest run.
    log_level : str
        Level of the service's JSON logs.
    result_cache_size : int
        Portfolios whose latest result the service keeps in memory, so that a new day computes
        only the windows it completes; the least recently fed beyond it is recomputed from the
        archive at its next ingest (0.5 s instead of 0.03 s for 24 assets and two years). A result
        holds the portfolio's prices, returns and float32 diagrams: a few MB for 100 assets and two
        years (1.5 MB pickled), about 75 MB for 500 assets and 20 years.
    key_recheck_seconds : float
        Age past which a worker reads an API key again from the archive before trusting it: a key
        revoked through any process is refused by every worker within this time (0: every request).
    """

    store_url: str = "sqlite:///riskshape.sqlite"
    max_body_bytes: int = Field(5_000_000, ge=1024)
    max_page_size: int = Field(1000, ge=1)
    rate_limit_per_minute: int = Field(600, ge=1)
    rate_limit_burst: int = Field(60, ge=1)
    config_path: str | None = None
    log_level: Literal["debug", "info", "warning", "error"] = "info"
    result_cache_size: int = Field(128, ge=0)
    key_recheck_seconds: float = Field(1.0, ge=0, le=60)

    @classmethod
    def from_env(cls, environ: Mapping[str, str] | None = None, **overrides: Any) -> ServiceSettings:
        """Read ``RISKSHAPE_STORE_URL``, ``RISKSHAPE_MAX_BODY_BYTES``, ... then apply ``overrides``."""
        env = os.environ if environ is None else environ
        data: dict[str, Any] = {}
        for name in cls.model_fields:
            key = f"RISKSHAPE_{name.upper()}"
            if key in env:
                data[name] = env[key]
        data.update({k: v for k, v in overrides.items() if v is not None})
        built: ServiceSettings = cls._build(data, "environment (RISKSHAPE_*)")
        return built
