"""Window positions.

* Windows are anchored at the first possible window (riskshape.compute.windows module notes), so adding
  days never moves a window already computed, and consecutive ends are ``step`` rows apart
  (property test against ``range``).
* The docstring examples of the library run as written through pytest's ``--doctest-modules``
  (``testpaths`` in pyproject.toml), not listed here.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from riskshape.compute.windows import window_end_positions


@settings(max_examples=50, deadline=None)
@given(window=st.integers(1, 30), step=st.integers(1, 10), n=st.integers(0, 120), more=st.integers(0, 40))
def test_window_ends_are_anchored_and_evenly_spaced(window: int, step: int, n: int, more: int) -> None:
    ends = window_end_positions(n, window, step)
    assert ends.tolist() == list(range(window - 1, n, step))
    longer = window_end_positions(n + more, window, step)
    np.testing.assert_array_equal(longer[: len(ends)], ends)  # old windows stay where they were
    assert np.all(ends - window + 1 >= 0) and np.all(ends < max(n, 1))  # each window fits the data
