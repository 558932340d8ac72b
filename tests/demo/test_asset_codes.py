"""Invented asset codes: the demo's and the tests' follow one pattern, so none reads as a listed symbol.

The rule (riskshape.demo.scenario.ASSET_CODE): ``Q`` or ``X``, one more capital letter, two digits.
Listed equity symbols on the US exchanges are letters only (with a class suffix such as ``.B``),
so a code that ends in digits cannot be one of them (from memory: the exchanges' symbol rules).
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import numpy as np
import pytest

from riskshape.demo.scenario import ASSET_CODE, SECTOR_PREFIXES, SECTORS, asset_codes, generate_scenario
from riskshape.errors import ConfigError
from tests.conftest import good_price_table
from tests.kit.archive import walk_prices
from tests.kit.assets import ASSETS, TEST_PREFIX, codes

TESTS = Path(__file__).resolve().parents[1]
# anything shaped "capital letters, then digits" in a test's source is taken for an asset code,
# except the homology dimensions' names (H0, H1, H2: the field's vocabulary)
_CODE_SHAPED = r"(?!H[0-9]$)[A-Z]{1,5}[0-9]{1,4}"


def _broken(codes_seen: list[str]) -> list[str]:
    return [c for c in codes_seen if not ASSET_CODE.fullmatch(c)]


@pytest.mark.parametrize("assets_per_sector", [3, 4, 8])
def test_every_demo_code_follows_the_pattern(assets_per_sector: int) -> None:
    scenario = generate_scenario(seed=7, n_days=30, assets_per_sector=assets_per_sector)
    names = [str(c) for c in scenario.prices.columns]
    assert len(names) == len(SECTORS) * assets_per_sector
    assert _broken(names) == []
    assert all(name.startswith("Q") for name in names)  # the demo's prefixes; the tests use X
    # one prefix per sector, and each asset's code carries its sector's prefix
    assert len(set(SECTOR_PREFIXES.values())) == len(SECTORS)
    assert all(name[:2] == SECTOR_PREFIXES[scenario.sectors[name]] for name in names)


def test_every_code_of_the_tests_shared_data_follows_the_pattern(rng: np.random.Generator) -> None:
    seen = [*ASSETS, *codes(99), *map(str, good_price_table().columns[1:]), *map(str, walk_prices(rng).columns)]
    assert len(seen) > 100
    assert _broken(seen) == []
    assert all(code.startswith(TEST_PREFIX) for code in seen)


def test_every_code_shaped_string_in_the_tests_follows_the_pattern() -> None:
    found: dict[str, list[str]] = {}
    pattern = re.compile(_CODE_SHAPED)
    for path in sorted(TESTS.rglob("*.py")):
        if path == Path(__file__).resolve():
            continue  # this file spells out codes that must be refused
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            text = node.value if isinstance(node, ast.Constant) else node.arg if isinstance(node, ast.keyword) else None
            if isinstance(text, str) and pattern.fullmatch(text):
                found.setdefault(f"{path.relative_to(TESTS)}:{node.lineno}", []).append(text)
    assert len(found) > 10  # the scan does reach the tests' price tables
    broken = {where: _broken(texts) for where, texts in found.items() if _broken(texts)}
    assert broken == {}, f"asset codes outside the pattern (use tests.kit.assets.codes): {broken}"


@pytest.mark.parametrize(
    "code",
    # what the pattern must refuse: letters only (a listed symbol's shape), old three-letter demo
    # prefixes, a one-letter prefix, prefixes outside Q/X, lower case, three digits
    ["ALD", "QUAD", "FOU01", "X01", "PC0", "AB12", "qy01", "QY001", "QY1"],
)
def test_the_pattern_refuses_symbol_like_codes(code: str) -> None:
    assert ASSET_CODE.fullmatch(code) is None


@pytest.mark.parametrize(("prefix", "n"), [("FOU", 3), ("X", 2), ("xq", 2), ("XQ", 0), ("XQ", 100)])
def test_asset_codes_refuses_what_would_break_the_pattern(prefix: str, n: int) -> None:
    with pytest.raises(ConfigError, match="asset_codes"):
        asset_codes(prefix, n)
