"""Invented asset codes shared by the tests.

Every code follows :data:`riskshape.demo.scenario.ASSET_CODE` (``X`` or ``Q``, a capital letter,
two digits), so none can be read as a listed symbol. The tests' own data use the ``XQ`` prefix
(the demo uses ``Q`` prefixes); :func:`codes` makes more when a test needs them.
"""

from __future__ import annotations

from riskshape.demo.scenario import ASSET_CODE, asset_codes

__all__ = ["ASSET_CODE", "ASSETS", "TEST_PREFIX", "codes"]

TEST_PREFIX = "XQ"


def codes(n: int, prefix: str = TEST_PREFIX) -> tuple[str, ...]:
    """``n`` invented codes of the tests: ``XQ01``, ``XQ02``, ..."""
    return asset_codes(prefix, n)


ASSETS: tuple[str, ...] = codes(4)  # XQ01..XQ04: the four assets of the small price tables
