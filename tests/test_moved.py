"""Old module paths still import, give the module at the new path, and warn with the new path."""

from __future__ import annotations

import importlib
import pickle
import sys

import pytest

import riskshape
from riskshape._moved import MOVED_MODULES


@pytest.mark.parametrize(("old", "new"), sorted(MOVED_MODULES.items()), ids=sorted(MOVED_MODULES))
def test_old_path_gives_the_new_module_and_warns(old: str, new: str) -> None:
    sys.modules.pop(old, None)
    with pytest.warns(DeprecationWarning, match=f"{old} moved to {new}"):
        module = importlib.import_module(old)
    assert module is importlib.import_module(new)
    assert module.__name__ == new and module.__spec__.name == new  # pickles and reloads under its new name


def test_old_monitor_module_keeps_the_monitor_function() -> None:
    sys.modules.pop("riskshape.monitor", None)
    with pytest.warns(DeprecationWarning, match="riskshape.compute.monitor"):
        from riskshape.monitor import MonitorResult
    assert MonitorResult is riskshape.MonitorResult
    assert callable(riskshape.monitor) and riskshape.monitor.__module__ == "riskshape.compute.monitor"


def test_names_of_old_modules_that_became_packages() -> None:
    from riskshape.compute import executors
    from riskshape.demo import runner

    assert riskshape.compute.make_executor is executors.make_executor  # was riskshape.compute (a module)
    assert riskshape.compute.keep_blas_pinned is executors.keep_blas_pinned
    assert riskshape.demo.run_demo is runner.run_demo  # was riskshape.demo (a module)
    with pytest.warns(DeprecationWarning, match="riskshape.demo.runner"):
        assert riskshape.demo.stress_window_end is runner.stress_window_end


def test_objects_reached_through_an_old_path_pickle_by_their_new_path() -> None:
    sys.modules.pop("riskshape.windows", None)
    with pytest.warns(DeprecationWarning):
        from riskshape.windows import window_end_positions
    assert b"riskshape.compute.windows" in pickle.dumps(window_end_positions)


def test_unknown_names_still_fail() -> None:
    with pytest.raises(ModuleNotFoundError):
        importlib.import_module("riskshape.no_such_module")
    with pytest.raises(AttributeError, match="no_such_name"):
        riskshape.no_such_name  # noqa: B018
