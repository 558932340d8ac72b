"""The installed package version."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("riskshape")
except PackageNotFoundError:  # pragma: no cover - running from a source tree without installing
    __version__ = "0.0.0+unknown"
