"""The demo: a fictional market with known regimes (:mod:`~riskshape.demo.scenario`) and the
command that monitors it end to end (:mod:`~riskshape.demo.runner`). Invented data only.

>>> from riskshape.demo import generate_scenario
>>> generate_scenario(seed=7).prices.shape[1] > 3
True
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from riskshape._lazy import lazy_exports

if TYPE_CHECKING:
    from riskshape.demo.runner import DemoReport as DemoReport
    from riskshape.demo.runner import run_demo as run_demo
    from riskshape.demo.scenario import Scenario as Scenario
    from riskshape.demo.scenario import generate_scenario as generate_scenario

_EXPORTS = {
    "DemoReport": "riskshape.demo.runner",
    "run_demo": "riskshape.demo.runner",
    "Scenario": "riskshape.demo.scenario",
    "generate_scenario": "riskshape.demo.scenario",
}

# names of the old module at this path, kept for old code (reading one warns)
_MOVED = {
    "DEMO_SUMMARIES": "riskshape.demo.runner",
    "stress_window_end": "riskshape.demo.runner",
}

__all__ = list(_EXPORTS)

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS, _MOVED)
